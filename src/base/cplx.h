/* cplx.h: RU_CMPLX(re, im), a double complex from its parts. C11's CMPLX is missing
 * where the compiler lacks glibc's __builtin_complex (clang 14); there the value is
 * built from a union, which keeps a signed zero or an infinity in either part as
 * CMPLX does (re + I*im would not). */
#ifndef RU_CPLX_H
#define RU_CPLX_H

#include <complex.h>

#ifdef CMPLX
#define RU_CMPLX(re, im) CMPLX((re), (im))
#else
static inline double complex ru_cmplx(double re, double im)
{
    union {
        double complex z;
        double part[2];
    } u;
    u.part[0] = re;
    u.part[1] = im;
    return u.z;
}
#define RU_CMPLX(re, im) ru_cmplx((re), (im))
#endif

#endif
