/* ru_test.h: shared includes and checks for the cmocka tests.
 * cmocka has no double comparison (assert_float_equal casts to float), so these
 * macros compare doubles with fabs and say both values on failure. */
#ifndef RU_TEST_H
#define RU_TEST_H

#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

/* |got - want| <= abs_tol */
#define RU_ASSERT_NEAR(got, want, abs_tol)                                        \
    do {                                                                          \
        double ru_g_ = (got), ru_w_ = (want), ru_t_ = (abs_tol);                  \
        if (!(fabs(ru_g_ - ru_w_) <= ru_t_))                                      \
            fail_msg("%s = %.12g, want %.12g within %.3g", #got, ru_g_, ru_w_,    \
                     ru_t_);                                                      \
    } while (0)

/* |got - want| <= rel_tol * |want| */
#define RU_ASSERT_REL(got, want, rel_tol)                                         \
    do {                                                                          \
        double ru_g_ = (got), ru_w_ = (want), ru_t_ = (rel_tol);                  \
        if (!(fabs(ru_g_ - ru_w_) <= ru_t_ * fabs(ru_w_)))                        \
            fail_msg("%s = %.12g, want %.12g within %.3g relative (off %.3g)",    \
                     #got, ru_g_, ru_w_, ru_t_, (ru_g_ - ru_w_) / ru_w_);         \
    } while (0)

#endif
