/* Test harness of the board kit's codec: one request a line on stdin, one answer a line
 * on stdout, so that a Python test can feed it thousands of cases through one process.
 *
 *   dec N HEX       decode a telegram of 6 + N integers -> "ok h0..h5 v0.." | "err CODE"
 *   enc X0 X1 ...   encode integers (header first) -> "ok HEX" | "err CODE"
 *   cobs HEX | uncobs HEX | frame HEX | unframe HEX -> "ok HEX" | "err CODE"
 *   crc HEX         -> "ok DECIMAL"
 *   rx HEX          push bytes into one receiver -> "ok HEX,HEX,.. frames crc cobs oversized"
 *   fec F frame HEX | fec F unframe HEX    FEC frames with F parity bytes a block
 *                   (unframe -> "ok HEX MENDED"); fec F rx HEX: the receiver set to F
 *                   (rx alone sets it to 0), its answer with "fec_failures fec_mended"
 *   rs P HEX        mend a codeword of P parity bytes -> "ok HEX MENDED" | "err CODE"
 *   parity P HEX    its P parity bytes -> "ok HEX"
 * HEX "-" is no bytes. Built with the sanitizers by the test where the compiler has them.
 * Every input is handed to the codec in a heap block of exactly its length and every
 * output buffer is exactly the capacity passed, so that AddressSanitizer sees a read or
 * write one byte past either.
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "railrig_codec.h"
#include "railrig_fec.h"

#define MAX_BYTES 16384
static char line[4 * MAX_BYTES];
static uint8_t in[MAX_BYTES];
static int64_t values[4096];
static rr_rx rx;
static long arg_cap; /* "cap N" before a request: its output capacity instead of the default */
static unsigned arg_fec; /* "fec F" before a request: FEC frames of F parity bytes a block */

static long unhex(const char *s, uint8_t *buf, size_t cap)
{
    size_t n = 0;
    if (s == NULL) {
        return -1;
    }
    if (strcmp(s, "-") == 0) {
        return 0;
    }
    while (s[0] && s[1]) {
        unsigned b;
        if (n >= cap || sscanf(s, "%2x", &b) != 1) {
            return -1;
        }
        buf[n++] = (uint8_t)b;
        s += 2;
    }
    return (long)n;
}

static void print_hex(const uint8_t *buf, long n)
{
    long i;
    if (n == 0) {
        fputc('-', stdout);
    }
    for (i = 0; i < n; i++) {
        printf("%02x", buf[i]);
    }
}

/* "ok HEX COUNT" for n >= 0 bytes of buf and a count (none when count < 0), "err n"
 * otherwise. */
static void answer_counted(const uint8_t *buf, int n, long count)
{
    if (n < 0) {
        printf("err %d\n", n);
        return;
    }
    fputs("ok ", stdout);
    print_hex(buf, n);
    if (count >= 0) {
        printf(" %ld", count);
    }
    fputc('\n', stdout);
}

static void answer_bytes(const uint8_t *buf, int n)
{
    answer_counted(buf, n, -1);
}

/* A heap block of exactly cap bytes (1 for none). */
static uint8_t *block(size_t cap)
{
    uint8_t *p = malloc(cap > 0 ? cap : 1u);
    if (p == NULL) {
        abort();
    }
    return p;
}

/* A heap copy of in[0..n) of exactly n bytes (1 for none). */
static uint8_t *exact(long n)
{
    uint8_t *p = block((size_t)n);
    memcpy(p, in, (size_t)n);
    return p;
}

/* Run one byte-to-byte request with exact buffers; cap is the output's capacity. */
static void bytes_request(int (*fn)(const uint8_t *, size_t, uint8_t *, size_t), long n,
                          size_t cap)
{
    uint8_t *src = exact(n);
    uint8_t *dst = block(cap);
    answer_bytes(dst, fn(src, (size_t)n, dst, cap));
    free(src);
    free(dst);
}

int main(void)
{
    setvbuf(stdout, NULL, _IOLBF, 0); /* one answer a line, at once */
    rr_rx_init(&rx);
    while (fgets(line, sizeof line, stdin) != NULL) {
        char *cmd = strtok(line, " \n");
        char *arg = strtok(NULL, " \n");
        long n;
        arg_cap = -1;
        if (cmd != NULL && strcmp(cmd, "cap") == 0 && arg != NULL) {
            arg_cap = strtol(arg, NULL, 10);
            cmd = strtok(NULL, " \n");
            arg = strtok(NULL, " \n");
        }
        arg_fec = 0;
        if (cmd != NULL && strcmp(cmd, "fec") == 0 && arg != NULL) {
            arg_fec = (unsigned)strtoul(arg, NULL, 10);
            cmd = strtok(NULL, " \n");
            arg = strtok(NULL, " \n");
        }
        if (cmd == NULL) {
            continue;
        }
        if (strcmp(cmd, "rs") == 0 || strcmp(cmd, "parity") == 0) {
            unsigned n_parity = arg != NULL ? (unsigned)strtoul(arg, NULL, 10) : 0;
            uint8_t *src;
            n = unhex(strtok(NULL, " \n"), in, sizeof in);
            if (n < 0 || n_parity > RR_FEC_MAX || (cmd[0] == 'r' && (n > 255 || n < (long)n_parity))
                || (cmd[0] == 'p' && (n_parity == 0 || n + (long)n_parity > 255))) {
                puts("err bad-request");
                continue;
            }
            src = exact(n);
            if (cmd[0] == 'r') {
                int rc = rr_rs_correct(src, (size_t)n, n_parity);
                answer_counted(src, rc < 0 ? rc : (int)n, rc);
            } else {
                uint8_t par[RR_FEC_MAX];
                rr_rs_parity(src, (size_t)n, n_parity, par);
                answer_bytes(par, (int)n_parity);
            }
            free(src);
        } else if (arg_fec && strcmp(cmd, "frame") == 0) {
            size_t cap;
            uint8_t *src, *dst;
            n = unhex(arg, in, sizeof in);
            if (n < 0) {
                puts("err bad-request");
                continue;
            }
            cap = arg_cap >= 0 ? (size_t)arg_cap : RR_RX_CAP + 1u;
            src = exact(n);
            dst = block(cap);
            answer_bytes(dst, rr_fec_frame_encode(src, (size_t)n, arg_fec, dst, cap));
            free(src);
            free(dst);
        } else if (arg_fec && strcmp(cmd, "unframe") == 0) {
            size_t cap;
            uint8_t *src, *dst;
            unsigned mended = 0;
            int rc;
            n = unhex(arg, in, sizeof in);
            if (n < 0) {
                puts("err bad-request");
                continue;
            }
            cap = arg_cap >= 0 ? (size_t)arg_cap : (size_t)n;
            src = exact(n);
            dst = block(cap);
            rc = rr_fec_frame_decode(src, (size_t)n, arg_fec, dst, cap, &mended);
            answer_counted(dst, rc, (long)mended);
            free(src);
            free(dst);
        } else if (strcmp(cmd, "enc") == 0) {
            rr_header h;
            int64_t head[RR_TELEGRAM_HEADER_LEN];
            size_t count = 0;
            while (arg != NULL && count < RR_TELEGRAM_HEADER_LEN + 4096) {
                int64_t x = strtoll(arg, NULL, 10);
                if (count < RR_TELEGRAM_HEADER_LEN) {
                    head[count] = x;
                } else {
                    values[count - RR_TELEGRAM_HEADER_LEN] = x;
                }
                count++;
                arg = strtok(NULL, " \n");
            }
            if (count < RR_TELEGRAM_HEADER_LEN) {
                puts("err bad-request");
                continue;
            }
            h.protocol_version = head[0];
            h.sequence = head[1];
            h.time_us = head[2];
            h.period_us = head[3];
            h.flags = head[4];
            h.map_digest = head[5];
            {
                size_t cap = arg_cap >= 0 ? (size_t)arg_cap : rr_telegram_max_size(count - RR_TELEGRAM_HEADER_LEN);
                uint8_t *dst = block(cap);
                answer_bytes(dst, rr_encode_telegram(dst, cap, &h, values,
                                                    count - RR_TELEGRAM_HEADER_LEN));
                free(dst);
            }
        } else if (strcmp(cmd, "dec") == 0) {
            size_t want = arg != NULL ? (size_t)strtoul(arg, NULL, 10) : 0;
            rr_header h;
            int rc;
            size_t i;
            n = unhex(strtok(NULL, " \n"), in, sizeof in);
            if (n < 0 || want > 4096) {
                puts("err bad-request");
                continue;
            }
            {
                uint8_t *src = exact(n);
                rc = rr_decode_telegram(src, (size_t)n, &h, values, want);
                free(src);
            }
            if (rc != RR_OK) {
                printf("err %d\n", rc);
                continue;
            }
            printf("ok %lld %lld %lld %lld %lld %lld", (long long)h.protocol_version,
                   (long long)h.sequence, (long long)h.time_us, (long long)h.period_us,
                   (long long)h.flags, (long long)h.map_digest);
            for (i = 0; i < want; i++) {
                printf(" %lld", (long long)values[i]);
            }
            fputc('\n', stdout);
        } else if (strcmp(cmd, "crc") == 0) {
            n = unhex(arg, in, sizeof in);
            printf("ok %u\n", n < 0 ? 0u : (unsigned)rr_crc16(in, (size_t)n));
        } else if (strcmp(cmd, "rx") == 0) {
            long i;
            int first = 1;
            n = unhex(arg, in, sizeof in);
            rx.fec = arg_fec;
            fputs("ok ", stdout);
            for (i = 0; i < n; i++) {
                if (rr_rx_push(&rx, in[i])) {
                    if (!first) {
                        fputc(',', stdout);
                    }
                    print_hex(rx.payload, (long)rx.length);
                    first = 0;
                }
            }
            if (first) {
                fputc('-', stdout);
            }
            printf(" %lu %lu %lu %lu", (unsigned long)rx.frames, (unsigned long)rx.crc_errors,
                   (unsigned long)rx.cobs_errors, (unsigned long)rx.oversized);
            if (arg_fec) {
                printf(" %lu %lu", (unsigned long)rx.fec_failures, (unsigned long)rx.fec_mended);
            }
            fputc('\n', stdout);
        } else {
            n = unhex(arg, in, sizeof in);
            if (n < 0) {
                puts("err bad-request");
            } else if (strcmp(cmd, "cobs") == 0) {  /* the capacity COBS needs at most */
                bytes_request(rr_cobs_encode, n, arg_cap >= 0 ? (size_t)arg_cap
                              : (size_t)n + (size_t)n / 254 + 1);
            } else if (strcmp(cmd, "uncobs") == 0) {
                bytes_request(rr_cobs_decode, n, arg_cap >= 0 ? (size_t)arg_cap : (size_t)n);
            } else if (strcmp(cmd, "frame") == 0) {
                bytes_request(rr_frame_encode, n, arg_cap >= 0 ? (size_t)arg_cap
                              : rr_frame_max_size((size_t)n));
            } else if (strcmp(cmd, "unframe") == 0) {
                bytes_request(rr_frame_decode, n, arg_cap >= 0 ? (size_t)arg_cap : (size_t)n);
            } else {
                puts("err bad-request");
            }
        }
        fflush(stdout);
    }
    return 0;
}
