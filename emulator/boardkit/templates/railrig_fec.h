/* railrig board kit: forward error correction of the serial frames (optional).
 *
 * Reed-Solomon over GF(2^8): primitive polynomial x^8 + x^4 + x^3 + x^2 + 1 (0x11D),
 * alpha = 2, generator roots alpha^0 .. alpha^(n_parity - 1); systematic, message first,
 * at most 255 bytes a codeword. It mends up to n_parity / 2 wrong bytes of a codeword.
 *
 * A FEC frame (the rig's emulator/link/framing.py tells the same layout):
 *   C = COBS(payload || CRC-16), cut into blocks of k = 255 - fec bytes (the last one
 *   shorter); P = the fec parity bytes of each block, in block order; on the line
 *   C, then P seven bits a byte (most significant bit first, spare bits of the last byte
 *   0) with the top bit set, then 0x00. The receiver finds the split from the length.
 * Both ends must use the same fec (an even number 2..64; 0 is plain framing).
 */
#ifndef RAILRIG_FEC_H
#define RAILRIG_FEC_H

#include <stddef.h>
#include <stdint.h>

#define RR_FEC_MAX 64

/* The n_parity parity bytes of msg (len + n_parity <= 255, n_parity 1..64) into
 * parity; nothing for an n_parity outside 1..64. */
void rr_rs_parity(const uint8_t *msg, size_t len, unsigned n_parity, uint8_t *parity);

/* Mend a codeword (message then parity, len <= 255) in place: the number of bytes
 * mended (0: none were wrong), or RR_E_FEC when they are past mending (left as it was)
 * or n_parity is outside 1..64 or above len. */
int rr_rs_correct(uint8_t *codeword, size_t len, unsigned n_parity);

/* A FEC frame of payload, delimiter included: its length, or RR_E_SPACE / RR_E_FEC
 * (fec not an even number 2..64). */
int rr_fec_frame_encode(const uint8_t *payload, size_t len, unsigned fec, uint8_t *out,
                        size_t cap);

/* The bytes between two delimiters of a FEC frame: mended in place (on an error the
 * frame may be left part mended), then as rr_frame_decode. Returns the payload's length or RR_E_FEC / RR_E_COBS / RR_E_CRC /
 * RR_E_SPACE; *mended (may be NULL) gets the wrong bytes found: those the code mended
 * and the groups of seven whose spare bits were wrong. */
int rr_fec_frame_decode(uint8_t *frame, size_t len, unsigned fec, uint8_t *payload,
                        size_t cap, unsigned *mended);

#endif
