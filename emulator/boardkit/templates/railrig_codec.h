/* railrig board kit: the board's side of the rig's wire protocol.
 *
 * Telegram codec (the fixed-layout subset of msgpack the rig speaks: one array of
 * integers), COBS framing (Cheshire & Baker, 1999) and CRC-16/CCITT-FALSE for serial
 * lines. C99, the standard library only, no malloc, integer arithmetic only. Every
 * function is bounded by the lengths it is given and never reads or writes past them.
 *
 * Safety: a board that runs this against the rig must not also be wired to a real power
 * stage. Follow your local codes and licensed practice wherever a real drive is energised.
 */
#ifndef RAILRIG_CODEC_H
#define RAILRIG_CODEC_H

#include <stddef.h>
#include <stdint.h>

/* Results: >= 0 a length in bytes (or RR_OK); < 0 one of these. */
#define RR_OK 0
#define RR_E_SHORT (-1)    /* the telegram ends inside an element */
#define RR_E_FORMAT (-2)   /* not an array, or an element is not an integer */
#define RR_E_LENGTH (-3)   /* the array has another number of elements than expected */
#define RR_E_RANGE (-4)    /* an integer past int64 */
#define RR_E_TRAILING (-5) /* bytes left after the array */
#define RR_E_SPACE (-6)    /* the output buffer is too small */
#define RR_E_COBS (-7)     /* not a valid COBS block */
#define RR_E_CRC (-8)      /* the CRC does not match (or the frame is too short for one) */
#define RR_E_FEC (-9)      /* FEC frames (railrig_fec.h): a block past mending */

/* The six header fields of every telegram, integers on the wire (the order is
 * railrig_map.h's RR_H_*). */
#define RR_TELEGRAM_HEADER_LEN 6
typedef struct {
    int64_t protocol_version;
    int64_t sequence;   /* rig -> board: frame number k; board -> rig: the k answered */
    int64_t time_us;    /* rig -> board: plant time t_k in us; board -> rig: free use */
    int64_t period_us;  /* rig -> board: the frame length; board -> rig: 0 or (lockstep)
                           the length of the frame this command drives */
    int64_t flags;      /* rig -> board: status bits RR_FLAG_*; board -> rig: request
                           bits RR_CFLAG_* (others 0) */
    int64_t map_digest; /* rig -> board: RR_MAP_DIGEST of the rig's map; board -> rig: its
                           own RR_MAP_DIGEST, or 0 (not checked) */
} rr_header;

/* Decode a telegram of exactly 6 + n_values integers into head and values (wire
 * units). Returns RR_OK or a negative RR_E_* code. */
int rr_decode_telegram(const uint8_t *buf, size_t len, rr_header *head, int64_t *values,
                       size_t n_values);

/* Encode head and n_values integers (wire units) as a msgpack array, each in its shortest
 * form (the bytes msgpack's reference packers write). Returns the length or RR_E_SPACE.
 * rr_telegram_max_size(n) bytes are always enough. */
int rr_encode_telegram(uint8_t *out, size_t cap, const rr_header *head,
                       const int64_t *values, size_t n_values);
size_t rr_telegram_max_size(size_t n_values);

/* CRC-16/CCITT-FALSE (poly 0x1021, init 0xFFFF, not reflected, xorout 0): 0x29B1 over
 * the ASCII bytes "123456789". */
uint16_t rr_crc16(const uint8_t *data, size_t len);

/* COBS: encode len bytes (the result holds no 0x00), decode one block (without its
 * delimiter). Return the output length or RR_E_SPACE / RR_E_COBS. */
int rr_cobs_encode(const uint8_t *in, size_t len, uint8_t *out, size_t cap);
int rr_cobs_decode(const uint8_t *in, size_t len, uint8_t *out, size_t cap);

/* Serial frame: COBS(payload || CRC-16 big-endian) followed by one 0x00. Encode returns
 * the frame's length including the delimiter; decode takes the bytes between two
 * delimiters and returns the payload's length, or RR_E_COBS / RR_E_CRC / RR_E_SPACE. */
int rr_frame_encode(const uint8_t *payload, size_t len, uint8_t *out, size_t cap);
int rr_frame_decode(const uint8_t *frame, size_t len, uint8_t *payload, size_t cap);
size_t rr_frame_max_size(size_t payload_len);

/* Incremental receiver for a serial line: feed bytes as they come; each call to
 * rr_rx_push returns 1 when a good payload is complete (in rx->payload, rx->length),
 * 0 otherwise. Bad frames are counted in fec_failures / cobs_errors / crc_errors /
 * oversized and dropped; the receiver resynchronises at the next 0x00. Set rx->fec
 * after rr_rx_init to receive FEC frames (railrig_fec.h); fec_mended counts the frames
 * that arrived with wrong bytes and were mended. */
#define RR_PAYLOAD_CAP 2048 /* the longest telegram framed or received, bytes */
#define RR_COBS_CAP (RR_PAYLOAD_CAP + 2 + (RR_PAYLOAD_CAP + 2) / 254 + 1) /* its COBS frame */
/* ... and with the most parity FEC adds (64 bytes for each 191, seven bits a byte) */
#define RR_RX_CAP (RR_COBS_CAP + ((RR_COBS_CAP / 191 + 1) * 64 * 8 + 6) / 7)
typedef struct {
    uint8_t buf[RR_RX_CAP];
    size_t fill;
    int skipping;        /* inside an oversized run: drop up to the next delimiter */
    unsigned fec;        /* parity bytes per block of a FEC frame; 0: plain frames */
    uint8_t payload[RR_PAYLOAD_CAP];
    size_t length;
    uint32_t frames, cobs_errors, crc_errors, oversized, fec_failures, fec_mended;
} rr_rx;
void rr_rx_init(rr_rx *rx);
int rr_rx_push(rr_rx *rx, uint8_t byte);

#endif
