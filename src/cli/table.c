/* table.c: text tables whose columns fit their contents (cli_table in cli.h). Cells
 * are copied in; at print time each column is as wide as its widest cell (counted in
 * characters, so µ or ± take one), columns two spaces apart, the last one unpadded.
 * A row may instead carry one free text after its first cell (an error message),
 * which is printed in full and does not widen any column. */
#include "cli/cli.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static size_t text_width(const char *s)
{
    size_t n = 0;
    for (const unsigned char *p = (const unsigned char *)s; p && *p; p++)
        n += (*p & 0xC0) != 0x80;
    return n;
}

void cli_table_init(cli_table *t, size_t ncols)
{
    memset(t, 0, sizeof *t);
    t->ncols = ncols < CLI_TABLE_COLS ? ncols : CLI_TABLE_COLS;
}

static char **new_row(cli_table *t)
{
    if (t->nrows == t->cap) {
        size_t cap = t->cap ? 2 * t->cap : 16;
        cli_table_row *r = realloc(t->rows, cap * sizeof *r);
        if (!r)
            return NULL;
        t->rows = r;
        t->cap = cap;
    }
    cli_table_row *r = &t->rows[t->nrows++];
    memset(r, 0, sizeof *r);
    return r->cell;
}

void cli_table_add(cli_table *t, const char *const *cells)
{
    char **row = new_row(t);
    for (size_t c = 0; row && c < t->ncols; c++)
        row[c] = strdup(cells[c] ? cells[c] : "");
}

void cli_table_add_text(cli_table *t, const char *first, const char *text)
{
    char **row = new_row(t);
    if (!row)
        return;
    row[0] = strdup(first ? first : "");
    t->rows[t->nrows - 1].text = strdup(text ? text : "");
}

void cli_table_print(const cli_table *t, FILE *fp, const char *indent)
{
    size_t w[CLI_TABLE_COLS] = {0};
    for (size_t r = 0; r < t->nrows; r++)
        for (size_t c = 0; c < t->ncols; c++)
            if (!t->rows[r].text || c == 0) {
                size_t k = text_width(t->rows[r].cell[c]);
                w[c] = k > w[c] ? k : w[c];
            }
    for (size_t r = 0; r < t->nrows; r++) {
        const cli_table_row *row = &t->rows[r];
        fputs(indent, fp);
        for (size_t c = 0; c < t->ncols; c++) {
            const char *s = row->cell[c] ? row->cell[c] : "";
            int last = c + 1 == t->ncols || (row->text && c == 0);
            fputs(s, fp);
            if (row->text && c == 0) {
                fprintf(fp, "%*s%s", (int)(w[0] - text_width(s) + 2), "", row->text);
                break;
            }
            if (!last)
                fprintf(fp, "%*s", (int)(w[c] - text_width(s) + 2), "");
        }
        fputc('\n', fp);
    }
}

void cli_table_free(cli_table *t)
{
    for (size_t r = 0; r < t->nrows; r++) {
        for (size_t c = 0; c < CLI_TABLE_COLS; c++)
            free(t->rows[r].cell[c]);
        free(t->rows[r].text);
    }
    free(t->rows);
    memset(t, 0, sizeof *t);
}
