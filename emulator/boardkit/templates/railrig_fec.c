/* railrig board kit: Reed-Solomon forward error correction of serial frames (see
 * railrig_fec.h). Decoding in the textbook steps (Blahut, "Algebraic Codes for Data
 * Transmission", 2003, ch. 7): syndromes, Berlekamp-Massey, Chien search, Forney. */
#include "railrig_codec.h"
#include "railrig_fec.h"

static uint8_t gf_exp[512];
static uint8_t gf_log[256];
static int gf_ready;

static void gf_init(void)
{
    unsigned i, x = 1;
    for (i = 0; i < 255; i++) {
        gf_exp[i] = (uint8_t)x;
        gf_exp[i + 255] = (uint8_t)x;
        gf_log[x] = (uint8_t)i;
        x <<= 1;
        if (x & 0x100u) {
            x ^= 0x11Du;
        }
    }
    gf_ready = 1;
}

static unsigned gf_mul(unsigned a, unsigned b)
{
    return (a == 0 || b == 0) ? 0u : gf_exp[gf_log[a] + gf_log[b]];
}

static unsigned gf_div(unsigned a, unsigned b) /* b != 0 */
{
    return a == 0 ? 0u : gf_exp[gf_log[a] + 255u - gf_log[b]];
}

static unsigned gf_pow_alpha(unsigned p) /* alpha^p, any p */
{
    return gf_exp[p % 255u];
}

/* g(x) = prod (x + alpha^i), highest power first, as logarithms (its coefficients are
 * all non-zero for n_parity 2..64: the rig's tests/link/test_reed_solomon.py). */
static void generator_log(unsigned n_parity, uint8_t *log_gen)
{
    uint8_t gen[RR_FEC_MAX + 1];
    unsigned i, j;
    gen[0] = 1;
    for (i = 1; i <= n_parity; i++) {
        gen[i] = 0;
    }
    for (i = 0; i < n_parity; i++) {
        for (j = i + 1; j > 0; j--) {
            gen[j] = (uint8_t)(gen[j] ^ gf_mul(gen[j - 1], gf_pow_alpha(i)));
        }
    }
    for (i = 0; i <= n_parity; i++) {
        log_gen[i] = gf_log[gen[i]];
    }
}

void rr_rs_parity(const uint8_t *msg, size_t len, unsigned n_parity, uint8_t *parity)
{
    uint8_t log_gen[RR_FEC_MAX + 1];
    unsigned j;
    size_t m;
    if (!gf_ready) {
        gf_init();
    }
    if (n_parity == 0 || n_parity > RR_FEC_MAX) {
        return;
    }
    generator_log(n_parity, log_gen);
    for (j = 0; j < n_parity; j++) {
        parity[j] = 0;
    }
    for (m = 0; m < len; m++) { /* LFSR division of msg(x) x^n_parity by g(x) */
        unsigned feedback = msg[m] ^ parity[0];
        if (feedback == 0) {
            for (j = 0; j + 1 < n_parity; j++) {
                parity[j] = parity[j + 1];
            }
            parity[n_parity - 1] = 0;
        } else {
            unsigned lf = gf_log[feedback];
            for (j = 0; j + 1 < n_parity; j++) {
                parity[j] = (uint8_t)(parity[j + 1] ^ gf_exp[lf + log_gen[j + 1]]);
            }
            parity[n_parity - 1] = gf_exp[lf + log_gen[n_parity]];
        }
    }
}

int rr_rs_correct(uint8_t *codeword, size_t len, unsigned n_parity)
{
    unsigned synd[RR_FEC_MAX], lam[RR_FEC_MAX + 1], prev[RR_FEC_MAX + 1],
        tmp[RR_FEC_MAX + 1], omega[RR_FEC_MAX], value[RR_FEC_MAX / 2];
    size_t where[RR_FEC_MAX / 2], i;
    unsigned j, k, r, length = 0, shift = 1, b = 1, degree = 0, found = 0, e;
    int clean = 1;
    if (!gf_ready) {
        gf_init();
    }
    if (len > 255 || n_parity == 0 || n_parity > RR_FEC_MAX || len < n_parity) {
        return RR_E_FEC;
    }
    { /* the common case first: the message part's parity is the parity received */
        uint8_t again[RR_FEC_MAX];
        rr_rs_parity(codeword, len - n_parity, n_parity, again);
        for (j = 0; j < n_parity; j++) {
            if (again[j] != codeword[len - n_parity + j]) {
                clean = 0;
            }
        }
        if (clean) {
            return 0;
        }
    }
    for (j = 0; j < n_parity; j++) { /* S_j = r(alpha^j), Horner */
        unsigned s = 0;
        for (i = 0; i < len; i++) {
            s = (s == 0 ? 0u : gf_exp[gf_log[s] + j]) ^ codeword[i];
        }
        synd[j] = s;
    }
    for (k = 0; k <= n_parity; k++) { /* Berlekamp-Massey; lam[k]: coefficient of x^k */
        lam[k] = prev[k] = 0;
    }
    lam[0] = prev[0] = 1;
    for (r = 0; r < n_parity; r++) {
        unsigned d = synd[r], coef;
        for (k = 1; k <= length; k++) {
            d ^= gf_mul(lam[k], synd[r - k]);
        }
        if (d == 0) {
            shift++;
            continue;
        }
        coef = gf_div(d, b);
        if (2 * length <= r) {
            for (k = 0; k <= n_parity; k++) {
                tmp[k] = lam[k];
            }
            for (k = shift; k <= n_parity; k++) {
                lam[k] ^= gf_mul(coef, prev[k - shift]);
            }
            length = r + 1 - length;
            for (k = 0; k <= n_parity; k++) {
                prev[k] = tmp[k];
            }
            b = d;
            shift = 1;
        } else {
            for (k = shift; k <= n_parity; k++) {
                lam[k] ^= gf_mul(coef, prev[k - shift]);
            }
            shift++;
        }
    }
    for (k = 0; k <= n_parity; k++) {
        if (lam[k] != 0) {
            degree = k;
        }
    }
    if (degree != length || 2 * length > n_parity) {
        return RR_E_FEC;
    }
    for (i = 0; i < len; i++) { /* Chien: byte i is the power p = len - 1 - i */
        unsigned p = (unsigned)(len - 1 - i), xinv = gf_pow_alpha(255u - p), v = 0;
        for (k = length + 1; k-- > 0;) {
            v = gf_mul(v, xinv) ^ lam[k];
        }
        if (v == 0) {
            if (found == length) {
                return RR_E_FEC;
            }
            where[found++] = i;
        }
    }
    if (found != length) {
        return RR_E_FEC; /* roots outside this shortened codeword */
    }
    for (k = 0; k < n_parity; k++) { /* Forney: omega = S lam mod x^n_parity */
        unsigned acc = 0, m;
        for (m = 0; m <= k && m <= length; m++) {
            acc ^= gf_mul(lam[m], synd[k - m]);
        }
        omega[k] = acc;
    }
    for (e = 0; e < length; e++) {
        unsigned p = (unsigned)(len - 1 - where[e]), xinv = gf_pow_alpha(255u - p);
        unsigned num = 0, den = 0;
        for (k = n_parity; k-- > 0;) {
            num = gf_mul(num, xinv) ^ omega[k];
        }
        for (k = 1; k <= length; k += 2) { /* lam'(x): the odd terms, x^(k-1) */
            unsigned term = lam[k], q;
            for (q = 1; q < k; q++) {
                term = gf_mul(term, xinv);
            }
            den ^= term;
        }
        if (den == 0) {
            return RR_E_FEC;
        }
        value[e] = gf_mul(gf_pow_alpha(p), gf_div(num, den));
    }
    for (e = 0; e < length; e++) {
        codeword[where[e]] = (uint8_t)(codeword[where[e]] ^ value[e]);
    }
    return (int)length;
}

static size_t blocks_of(size_t n_coded, unsigned fec)
{
    return (n_coded + (255u - fec) - 1u) / (255u - fec);
}

static size_t seven_bit_len(size_t n_bytes)
{
    return (8u * n_bytes + 6u) / 7u;
}

static int fec_ok(unsigned fec)
{
    return fec >= 2 && fec <= RR_FEC_MAX && fec % 2 == 0;
}

int rr_fec_frame_encode(const uint8_t *payload, size_t len, unsigned fec, uint8_t *out,
                        size_t cap)
{
    uint8_t parity[RR_FEC_MAX];
    size_t n_coded, blocks, b, at, bit = 0, n_groups, i;
    int n;
    if (!fec_ok(fec)) {
        return RR_E_FEC;
    }
    n = rr_frame_encode(payload, len, out, cap);
    if (n < 0) {
        return n;
    }
    n_coded = (size_t)n - 1u; /* without the delimiter */
    blocks = blocks_of(n_coded, fec);
    n_groups = seven_bit_len(blocks * fec);
    if (cap - n_coded < n_groups + 1u) {
        return RR_E_SPACE;
    }
    for (i = 0; i < n_groups; i++) {
        out[n_coded + i] = 0x80;
    }
    for (b = 0; b < blocks; b++) {
        size_t start = b * (255u - fec);
        size_t size = n_coded - start < 255u - fec ? n_coded - start : 255u - fec;
        rr_rs_parity(out + start, size, fec, parity);
        for (i = 0; i < fec; i++) { /* each parity bit into its group of seven */
            unsigned j;
            for (j = 0; j < 8; j++, bit++) {
                if (parity[i] & (0x80u >> j)) {
                    at = n_coded + bit / 7u;
                    out[at] = (uint8_t)(out[at] | (0x40u >> (bit % 7u)));
                }
            }
        }
    }
    out[n_coded + n_groups] = 0;
    return (int)(n_coded + n_groups + 1u);
}

int rr_fec_frame_decode(uint8_t *frame, size_t len, unsigned fec, uint8_t *payload,
                        size_t cap, unsigned *mended)
{
    uint8_t word[255];
    size_t blocks = 1, n_coded, b, i, bit;
    unsigned total = 0;
    if (mended != NULL) {
        *mended = 0;
    }
    if (!fec_ok(fec)) {
        return RR_E_FEC;
    }
    for (;;) { /* the split: the one block count that fits the length */
        size_t have;
        if (len <= seven_bit_len(blocks * fec)) {
            return RR_E_FEC;
        }
        n_coded = len - seven_bit_len(blocks * fec);
        have = blocks_of(n_coded, fec);
        if (have == blocks) {
            break;
        }
        if (have < blocks) {
            return RR_E_FEC;
        }
        blocks++;
    }
    { /* the groups' spare bits (top bit 1, the last one's padding 0): counted if wrong */
        size_t n_groups = seven_bit_len(blocks * fec), pad = 7u * n_groups - 8u * blocks * fec;
        for (i = 0; i < n_groups; i++) {
            if (!(frame[n_coded + i] & 0x80u)) {
                total++;
            }
        }
        if (pad && (frame[n_coded + n_groups - 1] & ((1u << pad) - 1u))) {
            total++;
        }
    }
    for (b = 0; b < blocks; b++) {
        size_t start = b * (255u - fec);
        size_t size = n_coded - start < 255u - fec ? n_coded - start : 255u - fec;
        int fixed;
        for (i = 0; i < size; i++) {
            word[i] = frame[start + i];
        }
        for (i = 0; i < fec; i++) { /* this block's parity out of the groups of seven */
            unsigned v = 0, j;
            for (j = 0; j < 8; j++) {
                bit = (b * fec + i) * 8u + j;
                v = (v << 1) | ((frame[n_coded + bit / 7u] >> (6u - bit % 7u)) & 1u);
            }
            word[size + i] = (uint8_t)v;
        }
        fixed = rr_rs_correct(word, size + fec, fec);
        if (fixed < 0) {
            return RR_E_FEC;
        }
        total += (unsigned)fixed;
        for (i = 0; i < size; i++) {
            frame[start + i] = word[i];
        }
    }
    if (mended != NULL) {
        *mended = total;
    }
    return rr_frame_decode(frame, n_coded, payload, cap);
}
