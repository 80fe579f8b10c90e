/* yamltext.c: the checks a circuit file's bytes pass before the YAML parser sees
 * them (ru_yaml_check_text, yamltree.h): the size limit, UTF-8 only (UTF-16 and
 * UTF-32 are named as such), no NUL byte, no control character, and no line
 * separator that some editors do not show as a new line (NEL, U+2028, U+2029),
 * so our line numbers are the editor's. Places count lines at LF, CR LF and CR
 * and columns in characters, as libyaml's marks do; a UTF-8 byte-order mark at
 * the start is skipped and not counted, as libyaml skips it. */
#include "circuit/yamltree.h"

#include <stdint.h>
#include <stdio.h>

/* Where the scan stands: 1-based line and column of the next character. */
typedef struct text_pos {
    int line, col;
} text_pos;

static ru_status refuse(const char *file, text_pos at, ru_error *err, const char *what)
{
    return ru_error_set(err, RU_EINPUT, file, at.line, at.col, "%s", what);
}

/* Length of the UTF-8 sequence at b[0..n) and its code point, or 0 when it is
 * not valid UTF-8 (overlong forms, surrogates and values above U+10FFFF are
 * not: RFC 3629, section 3). */
static size_t utf8_char(const unsigned char *b, size_t n, uint32_t *cp)
{
    unsigned char c = b[0];
    size_t len = c < 0x80 ? 1 : (c & 0xE0) == 0xC0 ? 2 : (c & 0xF0) == 0xE0 ? 3
                          : (c & 0xF8) == 0xF0 ? 4 : 0;
    if (len == 0 || len > n)
        return 0;
    uint32_t v = len == 1 ? c : (uint32_t)(c & (0x7F >> len));
    for (size_t k = 1; k < len; k++) {
        if ((b[k] & 0xC0) != 0x80)
            return 0;
        v = v << 6 | (uint32_t)(b[k] & 0x3F);
    }
    static const uint32_t least[5] = {0, 0, 0x80, 0x800, 0x10000};
    if (v < least[len] || v > 0x10FFFF || (v >= 0xD800 && v <= 0xDFFF))
        return 0;
    *cp = v;
    return len;
}

/* Whether YAML allows code point cp in a stream (YAML 1.1, section 5.1, the
 * printable set), less NEL, U+2028 and U+2029, which we refuse. */
static int allowed(uint32_t cp)
{
    return cp == 0x9 || cp == 0xA || cp == 0xD || (cp >= 0x20 && cp <= 0x7E) ||
           (cp >= 0xA0 && cp <= 0xD7FF && cp != 0x2028 && cp != 0x2029) ||
           (cp >= 0xE000 && cp <= 0xFFFD) || (cp >= 0x10000 && cp <= 0x10FFFF);
}

/* UTF-16 or UTF-32 by a byte-order mark or by a NUL in the first two bytes. */
static const char *wide_encoding(const unsigned char *b, size_t n)
{
    if (n >= 4 && ((b[0] == 0 && b[1] == 0 && b[2] == 0xFE && b[3] == 0xFF) ||
                   (b[0] == 0xFF && b[1] == 0xFE && b[2] == 0 && b[3] == 0)))
        return "UTF-32";
    if (n >= 2 && ((b[0] == 0xFE && b[1] == 0xFF) || (b[0] == 0xFF && b[1] == 0xFE)))
        return "UTF-16";
    if (n >= 2 && (b[0] == 0 || b[1] == 0))
        return "UTF-16 or UTF-32";
    return NULL;
}

ru_status ru_yaml_check_text(const char *text, size_t len, const char *file,
                             ru_error *err)
{
    const unsigned char *b = (const unsigned char *)text;
    if (len > RU_YAML_BYTES_MAX)
        return ru_error_set(err, RU_EINPUT, file, 0, 0,
                            "the file is %zu bytes, over the limit of %u bytes (4 MiB)", len,
                            RU_YAML_BYTES_MAX);
    text_pos at = {1, 1};
    const char *wide = wide_encoding(b, len);
    if (wide) {
        char msg[160];
        snprintf(msg, sizeof msg, "the file is %s text; save it as UTF-8", wide);
        return refuse(file, at, err, msg);
    }
    size_t i = (len >= 3 && b[0] == 0xEF && b[1] == 0xBB && b[2] == 0xBF) ? 3 : 0;
    while (i < len) {
        uint32_t cp = 0;
        size_t w = utf8_char(b + i, len - i, &cp);
        char msg[160];
        if (w == 0) {
            snprintf(msg, sizeof msg, "byte 0x%02X is not UTF-8 text; save the file as UTF-8",
                     b[i]);
            return refuse(file, at, err, msg);
        }
        if (cp == 0)
            return refuse(file, at, err,
                          "a NUL byte is not allowed in a circuit file (is it a binary file?)");
        if (!allowed(cp)) {
            snprintf(msg, sizeof msg,
                     "character U+%04X (%s) is not allowed in a circuit file", (unsigned)cp,
                     cp == 0x85 || cp == 0x2028 || cp == 0x2029 ? "a line separator"
                                                               : "a control character");
            return refuse(file, at, err, msg);
        }
        i += w;
        if (cp == '\n' || (cp == '\r' && (i >= len || b[i] != '\n'))) {
            at.line++;
            at.col = 1;
        } else if (cp != '\r') {
            at.col++;
        }
    }
    return RU_OK;
}
