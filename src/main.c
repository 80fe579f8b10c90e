/* main.c: the ringup command-line tool (placeholder until the CLI lands). */
#include <stdio.h>
int main(void)
{
    puts("ringup " RU_VERSION);
    return 0;
}
