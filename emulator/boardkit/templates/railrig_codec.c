/* railrig board kit: telegram codec, COBS and CRC-16 (see railrig_codec.h). */
#include "railrig_codec.h"
#include "railrig_fec.h"

/* ---- msgpack: the integer forms and the array header (msgpack specification) ---- */

static int read_be(const uint8_t *buf, size_t len, size_t *pos, unsigned n, uint64_t *out)
{
    uint64_t v = 0;
    unsigned i;
    if (len - *pos < n) {
        return RR_E_SHORT;
    }
    for (i = 0; i < n; i++) {
        v = (v << 8) | buf[*pos + i];
    }
    *pos += n;
    *out = v;
    return RR_OK;
}

/* Two's complement of an n-byte value to int64 without implementation-defined casts. */
static int64_t signed_of(uint64_t v, unsigned n)
{
    uint64_t magnitude;
    if (n < 8) {
        uint64_t sign = (uint64_t)1 << (8u * n - 1u);
        return (v & sign) ? (int64_t)v - ((int64_t)1 << (8u * n)) : (int64_t)v;
    }
    if (v <= (uint64_t)INT64_MAX) {
        return (int64_t)v;
    }
    magnitude = ~v + 1u; /* 1 .. 2^63 */
    if (magnitude == (uint64_t)1 << 63) {
        return INT64_MIN;
    }
    return -(int64_t)magnitude;
}

static int read_int(const uint8_t *buf, size_t len, size_t *pos, int64_t *out)
{
    uint8_t tag;
    uint64_t v;
    int rc;
    unsigned n;
    if (*pos >= len) {
        return RR_E_SHORT;
    }
    tag = buf[(*pos)++];
    if (tag <= 0x7f) {
        *out = tag;
        return RR_OK;
    }
    if (tag >= 0xe0) {
        *out = (int64_t)tag - 256;
        return RR_OK;
    }
    switch (tag) {
    case 0xcc: case 0xcd: case 0xce: case 0xcf:
        n = 1u << (tag - 0xcc);
        rc = read_be(buf, len, pos, n, &v);
        if (rc != RR_OK) {
            return rc;
        }
        if (v > (uint64_t)INT64_MAX) {
            return RR_E_RANGE;
        }
        *out = (int64_t)v;
        return RR_OK;
    case 0xd0: case 0xd1: case 0xd2: case 0xd3:
        n = 1u << (tag - 0xd0);
        rc = read_be(buf, len, pos, n, &v);
        if (rc != RR_OK) {
            return rc;
        }
        *out = signed_of(v, n);
        return RR_OK;
    default:
        return RR_E_FORMAT;
    }
}

int rr_decode_telegram(const uint8_t *buf, size_t len, rr_header *head, int64_t *values,
                       size_t n_values)
{
    size_t pos = 0, count, i;
    uint64_t v;
    uint8_t tag;
    int64_t header[RR_TELEGRAM_HEADER_LEN];
    int rc;
    if (len == 0) {
        return RR_E_SHORT;
    }
    tag = buf[pos++];
    if ((tag & 0xf0) == 0x90) {
        count = tag & 0x0fu;
    } else if (tag == 0xdc || tag == 0xdd) {
        rc = read_be(buf, len, &pos, tag == 0xdc ? 2u : 4u, &v);
        if (rc != RR_OK) {
            return rc;
        }
        count = (size_t)v;
        if ((uint64_t)count != v) {
            return RR_E_LENGTH;
        }
    } else {
        return RR_E_FORMAT;
    }
    if (count < RR_TELEGRAM_HEADER_LEN || count - RR_TELEGRAM_HEADER_LEN != n_values) {
        return RR_E_LENGTH;
    }
    for (i = 0; i < count; i++) {
        int64_t x;
        rc = read_int(buf, len, &pos, &x);
        if (rc != RR_OK) {
            return rc;
        }
        if (i < RR_TELEGRAM_HEADER_LEN) {
            header[i] = x;
        } else {
            values[i - RR_TELEGRAM_HEADER_LEN] = x;
        }
    }
    if (pos != len) {
        return RR_E_TRAILING;
    }
    head->protocol_version = header[0];
    head->sequence = header[1];
    head->time_us = header[2];
    head->period_us = header[3];
    head->flags = header[4];
    head->map_digest = header[5];
    return RR_OK;
}

static int put(uint8_t *out, size_t cap, size_t *pos, uint8_t tag, uint64_t v, unsigned n)
{
    unsigned i;
    if (cap - *pos < 1u + n) {
        return RR_E_SPACE;
    }
    out[(*pos)++] = tag;
    for (i = 0; i < n; i++) {
        out[(*pos)++] = (uint8_t)(v >> (8u * (n - 1u - i)));
    }
    return RR_OK;
}

static int write_int(uint8_t *out, size_t cap, size_t *pos, int64_t x)
{
    uint64_t u;
    if (x >= 0) {
        u = (uint64_t)x;
        if (u <= 0x7f) {
            return put(out, cap, pos, (uint8_t)u, 0, 0);
        }
        if (u <= 0xff) {
            return put(out, cap, pos, 0xcc, u, 1);
        }
        if (u <= 0xffff) {
            return put(out, cap, pos, 0xcd, u, 2);
        }
        if (u <= 0xffffffffu) {
            return put(out, cap, pos, 0xce, u, 4);
        }
        return put(out, cap, pos, 0xcf, u, 8);
    }
    u = (uint64_t)x; /* the two's complement bits of x (conversion modulo 2^64) */
    if (x >= -32) {
        return put(out, cap, pos, (uint8_t)(0xe0u | (u & 0x1fu)), 0, 0);
    }
    if (x >= -128) {
        return put(out, cap, pos, 0xd0, u & 0xffu, 1);
    }
    if (x >= -32768) {
        return put(out, cap, pos, 0xd1, u & 0xffffu, 2);
    }
    if (x >= -2147483647 - 1) {
        return put(out, cap, pos, 0xd2, u & 0xffffffffu, 4);
    }
    return put(out, cap, pos, 0xd3, u, 8);
}

size_t rr_telegram_max_size(size_t n_values)
{
    return 5u + 9u * (RR_TELEGRAM_HEADER_LEN + n_values);
}

int rr_encode_telegram(uint8_t *out, size_t cap, const rr_header *head,
                       const int64_t *values, size_t n_values)
{
    size_t pos = 0, count = RR_TELEGRAM_HEADER_LEN + n_values, i;
    int rc;
    int64_t header[RR_TELEGRAM_HEADER_LEN];
    if (count <= 15) {
        rc = put(out, cap, &pos, (uint8_t)(0x90u | count), 0, 0);
    } else if (count <= 0xffff) {
        rc = put(out, cap, &pos, 0xdc, count, 2);
    } else {
        rc = put(out, cap, &pos, 0xdd, count, 4);
    }
    if (rc != RR_OK) {
        return rc;
    }
    header[0] = head->protocol_version;
    header[1] = head->sequence;
    header[2] = head->time_us;
    header[3] = head->period_us;
    header[4] = head->flags;
    header[5] = head->map_digest;
    for (i = 0; i < count; i++) {
        rc = write_int(out, cap, &pos, i < RR_TELEGRAM_HEADER_LEN
                                            ? header[i] : values[i - RR_TELEGRAM_HEADER_LEN]);
        if (rc != RR_OK) {
            return rc;
        }
    }
    return (int)pos;
}

/* ---- CRC-16/CCITT-FALSE, bit by bit (no table: 512 bytes saved on small boards) ---- */

uint16_t rr_crc16(const uint8_t *data, size_t len)
{
    uint16_t crc = 0xFFFFu;
    size_t i;
    unsigned b;
    for (i = 0; i < len; i++) {
        crc ^= (uint16_t)((unsigned)data[i] << 8); /* unsigned: no int overflow on 16-bit int */
        for (b = 0; b < 8; b++) {
            crc = (uint16_t)((crc & 0x8000u) ? ((unsigned)crc << 1) ^ 0x1021u
                                               : (unsigned)crc << 1);
        }
    }
    return crc;
}

/* ---- COBS ---- */

int rr_cobs_encode(const uint8_t *in, size_t len, uint8_t *out, size_t cap)
{
    size_t code_pos = 0, o = 1, i;
    uint8_t code = 1;
    if (cap < 1) {
        return RR_E_SPACE;
    }
    for (i = 0; i < len; i++) {
        if (in[i] == 0) {
            out[code_pos] = code;
            if (o >= cap) {
                return RR_E_SPACE;
            }
            code_pos = o++;
            code = 1;
        } else {
            if (o >= cap) {
                return RR_E_SPACE;
            }
            out[o++] = in[i];
            code++;
            if (code == 0xFF) {
                out[code_pos] = code;
                if (i + 1 == len) {
                    return (int)o; /* a full block at the end: no trailing code */
                }
                if (o >= cap) {
                    return RR_E_SPACE;
                }
                code_pos = o++;
                code = 1;
            }
        }
    }
    out[code_pos] = code;
    return (int)o;
}

int rr_cobs_decode(const uint8_t *in, size_t len, uint8_t *out, size_t cap)
{
    size_t i = 0, o = 0, j;
    while (i < len) {
        uint8_t code = in[i++];
        if (code == 0 || (size_t)(code - 1u) > len - i) {
            return RR_E_COBS;
        }
        for (j = 1; j < code; j++) {
            uint8_t b = in[i++];
            if (b == 0) {
                return RR_E_COBS;
            }
            if (o >= cap) {
                return RR_E_SPACE;
            }
            out[o++] = b;
        }
        if (code != 0xFF && i < len) {
            if (o >= cap) {
                return RR_E_SPACE;
            }
            out[o++] = 0;
        }
    }
    return (int)o;
}

/* ---- serial frames ---- */

size_t rr_frame_max_size(size_t payload_len)
{
    size_t n = payload_len + 2u;
    return n + n / 254u + 2u;
}

int rr_frame_encode(const uint8_t *payload, size_t len, uint8_t *out, size_t cap)
{
    uint8_t tmp[RR_PAYLOAD_CAP + 2];
    uint16_t crc;
    size_t i;
    int n;
    if (len > RR_PAYLOAD_CAP) {
        return RR_E_SPACE;
    }
    for (i = 0; i < len; i++) {
        tmp[i] = payload[i];
    }
    crc = rr_crc16(payload, len);
    tmp[len] = (uint8_t)(crc >> 8);
    tmp[len + 1] = (uint8_t)(crc & 0xffu);
    n = rr_cobs_encode(tmp, len + 2, out, cap);
    if (n < 0) {
        return n;
    }
    if ((size_t)n >= cap) {
        return RR_E_SPACE;
    }
    out[n] = 0;
    return n + 1;
}

int rr_frame_decode(const uint8_t *frame, size_t len, uint8_t *payload, size_t cap)
{
    uint8_t tmp[RR_PAYLOAD_CAP + 2];
    int n = rr_cobs_decode(frame, len, tmp, sizeof tmp);
    size_t i, m;
    if (n < 0) {
        return n == RR_E_SPACE ? RR_E_SPACE : RR_E_COBS;
    }
    if (n < 2) {
        return RR_E_CRC;
    }
    m = (size_t)n - 2u;
    if (rr_crc16(tmp, m) != (uint16_t)(((unsigned)tmp[m] << 8) | tmp[m + 1])) {
        return RR_E_CRC;
    }
    if (m > cap) {
        return RR_E_SPACE;
    }
    for (i = 0; i < m; i++) {
        payload[i] = tmp[i];
    }
    return (int)m;
}

void rr_rx_init(rr_rx *rx)
{
    rx->fill = 0;
    rx->skipping = 0;
    rx->length = 0;
    rx->fec = 0;
    rx->frames = rx->cobs_errors = rx->crc_errors = rx->oversized = 0;
    rx->fec_failures = rx->fec_mended = 0;
}

int rr_rx_push(rr_rx *rx, uint8_t byte)
{
    int n;
    if (byte != 0) {
        if (rx->skipping) {
            return 0;
        }
        if (rx->fill >= RR_RX_CAP) {
            rx->oversized++;
            rx->skipping = 1;
            rx->fill = 0;
            return 0;
        }
        rx->buf[rx->fill++] = byte;
        return 0;
    }
    if (rx->skipping || rx->fill == 0) { /* end of a dropped run, or an idle delimiter */
        rx->skipping = 0;
        rx->fill = 0;
        return 0;
    }
    if (rx->fec) {
        unsigned mended = 0;
        n = rr_fec_frame_decode(rx->buf, rx->fill, rx->fec, rx->payload, sizeof rx->payload,
                                &mended);
        if (n >= 0 && mended) {
            rx->fec_mended++;
        }
    } else {
        n = rr_frame_decode(rx->buf, rx->fill, rx->payload, sizeof rx->payload);
    }
    rx->fill = 0;
    if (n == RR_E_FEC) {
        rx->fec_failures++;
        return 0;
    }
    if (n == RR_E_CRC) {
        rx->crc_errors++;
        return 0;
    }
    if (n < 0) {
        rx->cobs_errors++;
        return 0;
    }
    rx->length = (size_t)n;
    rx->frames++;
    return 1;
}
