/* emit_probe: drives pt_emit directly, one directive a line on stdin, for tests/firmware/test_emit*.py.
 *
 *   K 0|1                     checksums off / on (a fresh emitter; the sequence starts at 0)
 *   F SEQ STATES|- V0 V1 ...  a frame with sequence number SEQ; STATES is one digit 0-9 per value, or -
 *   I ANNOUNCE BOARD|- CHANNELS RATE_MHZ NAMES|- METHOD|- POLARITY|- FW|- SETTINGS STATES
 *                             an info line; NAMES and POLARITY comma lists (polarity as + and -)
 *   C TEXT                    a comment (TEXT may hold \xHH escapes for any byte)
 *   N V                       a line `=V` of one signed number; U V: `=V` unsigned
 *   L TEXT                    a line of TEXT as it is (begin, str, end)
 *
 * Host program for tests only: stdio is fine here.
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../pt_emit.h"

#define MAX_VALUES 1024

static void put(void *ctx, char c)
{
    (void)ctx;
    putchar((unsigned char)c);
}

static void unescape(char *s)
{
    char *out = s;
    while (*s != '\0') {
        if (s[0] == '\\' && s[1] == 'x' && s[2] != '\0' && s[3] != '\0') {
            char hex[3] = {s[2], s[3], '\0'};
            *out++ = (char)strtol(hex, NULL, 16);
            s += 4;
        } else {
            *out++ = *s++;
        }
    }
    *out = '\0';
}

static const char *opt_text(const char *t)
{
    return strcmp(t, "-") == 0 ? NULL : t;
}

int main(void)
{
    static char line[70000];
    static int32_t values[MAX_VALUES];
    static uint8_t states[MAX_VALUES];
    static const char *names[MAX_VALUES];
    static int8_t pol[MAX_VALUES];
    pt_emit_t e;
    pt_emit_init(&e, put, NULL, 1);
    while (fgets(line, sizeof line, stdin) != NULL) {
        char *nl = strchr(line, '\n');
        char *tok;
        if (nl != NULL) {
            *nl = '\0';
        }
        if (line[0] == 'K') {
            pt_emit_init(&e, put, NULL, atoi(line + 2));
        } else if (line[0] == 'F') {
            unsigned n = 0;
            char *st;
            long seq = strtol(strtok(line + 2, " "), NULL, 10);
            st = strtok(NULL, " ");
            while ((tok = strtok(NULL, " ")) != NULL && n < MAX_VALUES) {
                values[n] = (int32_t)strtoll(tok, NULL, 10);
                states[n] = (uint8_t)(strcmp(st, "-") != 0 && st[n] != '\0' ? st[n] - '0' : 0);
                n++;
            }
            pt_emit_set_seq(&e, (uint16_t)seq);
            pt_emit_frame(&e, values, (uint16_t)n, strcmp(st, "-") == 0 ? NULL : states);
        } else if (line[0] == 'I') {
            pt_info_t info;
            int announce = atoi(strtok(line + 2, " "));
            char *list;
            unsigned n = 0;
            memset(&info, 0, sizeof info);
            info.board = opt_text(strtok(NULL, " "));
            info.channels = (uint16_t)atoi(strtok(NULL, " "));
            info.rate_mhz = (uint32_t)strtoul(strtok(NULL, " "), NULL, 10);
            list = strtok(NULL, " ");
            info.method = opt_text(strtok(NULL, " "));
            {
                char *p = strtok(NULL, " ");
                info.fw = NULL;
                if (strcmp(p, "-") != 0) {
                    unsigned c;
                    for (c = 0; c < info.channels; c++) {
                        pol[c] = (int8_t)(p[2 * c] == '-' ? -1 : 1);
                    }
                    info.polarity = pol;
                }
            }
            info.fw = opt_text(strtok(NULL, " "));
            info.settings = (uint8_t)atoi(strtok(NULL, " "));
            info.states = (uint8_t)atoi(strtok(NULL, " "));
            if (strcmp(list, "-") != 0) {
                for (tok = strtok(list, ","); tok != NULL && n < MAX_VALUES; tok = strtok(NULL, ",")) {
                    names[n++] = tok;
                }
                info.names = names;
            }
            pt_emit_info(&e, &info, announce);
        } else if (line[0] == 'C') {
            unescape(line + 2);
            pt_emit_comment(&e, line + 2);
        } else if (line[0] == 'L') {
            pt_emit_begin(&e);
            pt_emit_str(&e, line + 2);
            pt_emit_end(&e);
        } else if (line[0] == 'N' || line[0] == 'U') {
            pt_emit_begin(&e);
            pt_emit_char(&e, '=');
            if (line[0] == 'N') {
                pt_emit_int(&e, (int32_t)strtoll(line + 2, NULL, 10));
            } else {
                pt_emit_uint(&e, (uint32_t)strtoull(line + 2, NULL, 10));
            }
            pt_emit_end(&e);
        }
    }
    return 0;
}
