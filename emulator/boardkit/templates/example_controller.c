/* example_controller.c: a small controller for the rig, from the board kit.
 *
 * It answers every measurement telegram with a command telegram (the sequence number of
 * the measurement it answers), runs the line side's switch-on sequence (main breaker,
 * precharge, line contactors; the line converters stay blocked and feed the DC links as
 * diode bridges), then starts the motors open loop: V/f with the stator frequency set a
 * fixed slip above the encoder speed, the slip cut back while the phase current is past
 * a limit. It is a starting point for a board's own code, not a traction control.
 *
 *   example_controller --bind HOST:PORT --rig HOST:PORT --frames N      (UDP)
 *   example_controller --serial DEVICE --baud N --frames N               (serial line)
 *   options: --slip-hz F (default 1.5), --current-limit-a A (phase peak, default 60 %
 *            of the gate drivers' trip), --quiet
 *
 * A measurement the rig sends again (the same sequence, flag RR_FLAG_REPEAT: our answer
 * was lost or damaged) gets the same answer again, without running the control a second
 * time. On a serial line, a frame from the rig that fails COBS or the CRC gets a repeat
 * request (RR_CFLAG_REPEAT_REQUEST) at once, so lockstep goes on after one round trip;
 * so does a frame that passes them but holds no telegram it can read (counted as
 * unreadable; over UDP it is dropped and the rig's silence repeat follows).
 *
 * Exits 0 after N answered frames; 1 when the rig stays silent (120 s before its first
 * telegram: its first start after install compiles for tens of seconds; 10 s later);
 * 2 on bad arguments or a map mismatch (protocol version or map digest: the kit was
 * generated for another trainset profile) at the first telegram or three in a row.
 *
 * Safety: run it against the rig only; never on hardware wired to a real power stage.
 */
#define _POSIX_C_SOURCE 200809L

#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <netdb.h>
#include <poll.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <sys/types.h>
#include <termios.h>
#include <unistd.h>

#include "railrig_codec.h"
#include "railrig_fec.h"
#include "railrig_map.h"

#define PI 3.14159265358979323846

/* ---- the control law ---- */

enum { OFF, BREAKER, PRECHARGE, LINE, RUNNING, FAULT };
static const char *const STATE_NAMES[] = {"off", "closing breaker", "precharging",
                                          "closing line contactors", "running", "fault"};

typedef struct {
    int state;
    double timer_s;
    double theta;             /* stator voltage angle, rad */
    double speed_rad_s;       /* mean rotor speed from the encoders */
    double slip_hz;           /* commanded slip frequency */
    double slip_set_hz;       /* its setting */
    double v_scale;           /* voltage reduction by the current limit, 0.2 .. 1 */
    double current_limit_a;   /* phase peak */
    uint16_t last_count[RR_N_MOTORS];
    int have_counts;
    unsigned long answered, flagged, repeated, repeat_requests;
    unsigned long unreadable;      /* telegrams that passed the framing but not the codec */
    int mismatch_run;              /* another protocol or map in a row (noise, or a kit
                                      generated for another profile) */
    int64_t last_sequence;         /* the measurement answered last (-1: none yet) */
    uint8_t last_reply[RR_PAYLOAD_CAP]; /* and the answer, for a measurement said again */
    size_t last_reply_len;
} controller;

/* the kit's codec and its map must agree on the header (a C99 compile-time check) */
typedef char rr_header_len_check[RR_HEADER_LEN == RR_TELEGRAM_HEADER_LEN ? 1 : -1];

static const double Y_SCALE[RR_N_MEASUREMENTS] = RR_Y_SCALES;
static int64_t y_wire[RR_N_MEASUREMENTS]; /* the last measurement, wire units */
static const double U_SCALE[RR_N_COMMANDS] = RR_U_SCALES;
static const double U_LO[RR_N_COMMANDS] = RR_U_LO;
static const double U_HI[RR_N_COMMANDS] = RR_U_HI;
static const int LINK_VOLTAGE[RR_N_LINKS] = RR_LINK_Y_VOLTAGE;
static const int INV_LINK[RR_N_INVERTERS] = RR_INVERTER_LINK;
static const int INV_DUTY[3][RR_N_INVERTERS] = {RR_INVERTER_U_DUTY_A, RR_INVERTER_U_DUTY_B,
                                                RR_INVERTER_U_DUTY_C};
static const int INV_GATES[RR_N_INVERTERS] = RR_INVERTER_U_GATES;
static const int INV_CURRENT[3][RR_N_INVERTERS] = {
    RR_INVERTER_Y_CURRENT_A, RR_INVERTER_Y_CURRENT_B, RR_INVERTER_Y_CURRENT_C};
static const int INV_GATE_FAULT[RR_N_INVERTERS] = RR_INVERTER_Y_GATE_FAULT;
static const int MOTOR_COUNT[RR_N_MOTORS] = RR_MOTOR_Y_ENCODER_COUNT;
#if RR_HAS_LINE_SIDE
static const int LC_PRECHARGE[] = RR_LINE_CONVERTER_U_PRECHARGE_CLOSE;
static const int LC_CONTACTOR[] = RR_LINE_CONVERTER_U_LINE_CONTACTOR_CLOSE;
static const int LC_PRECHARGE_CLOSED[] = RR_LINE_CONVERTER_Y_PRECHARGE_CLOSED;
static const int LC_CONTACTOR_CLOSED[] = RR_LINE_CONVERTER_Y_LINE_CONTACTOR_CLOSED;
#endif

static double lowest_link_v(const double *y)
{
    double v = HUGE_VAL;
    int i;
    for (i = 0; i < RR_N_LINKS; i++) {
        if (y[LINK_VOLTAGE[i]] < v) {
            v = y[LINK_VOLTAGE[i]];
        }
    }
    return v;
}

/* the switch-on sequence; returns whether the inverters may run */
static int switch_on(controller *c, const double *y, double *u, double period_s)
{
    double charged_v;
    int i, all_pre = 1, all_line = 1;
    c->timer_s += period_s;
#if RR_HAS_LINE_SIDE
    charged_v = 0.85 * sqrt(2.0) * RR_SECONDARY_VOLTAGE_V; /* the diode bridge's level */
    for (i = 0; i < RR_N_LINE_CONVERTERS; i++) {
        all_pre &= y[LC_PRECHARGE_CLOSED[i]] > 0.5;
        all_line &= y[LC_CONTACTOR_CLOSED[i]] > 0.5;
    }
    switch (c->state) {
    case OFF:
        c->state = BREAKER;
        c->timer_s = 0.0;
        break;
    case BREAKER:
        if (y[RR_Y_LINE_BREAKER_CLOSED] > 0.5) {
            c->state = PRECHARGE;
            c->timer_s = 0.0;
        }
        break;
    case PRECHARGE:
        if (all_pre && lowest_link_v(y) >= charged_v) {
            c->state = LINE;
            c->timer_s = 0.0;
        }
        break;
    case LINE:
        if (all_line && c->timer_s >= 0.05) {
            c->state = RUNNING;
            c->timer_s = 0.0;
        }
        break;
    case RUNNING: /* the breaker opened (its own trip, a dead line) or a link sagged:
                     start again from the breaker, precharging the links */
        if (y[RR_Y_LINE_BREAKER_CLOSED] < 0.5 || y[RR_Y_LINE_OVERCURRENT_TRIP] > 0.5
            || lowest_link_v(y) < 0.5 * charged_v) {
            c->state = OFF;
            c->timer_s = 0.0;
        }
        break;
    default:
        break;
    }
    if (c->state != RUNNING && c->state != FAULT && c->timer_s > 5.0) {
        c->state = FAULT; /* a step that never completes: open everything */
    }
    u[RR_U_LINE_BREAKER_CLOSE] = c->state >= BREAKER && c->state <= RUNNING;
    for (i = 0; i < RR_N_LINE_CONVERTERS; i++) {
        u[LC_PRECHARGE[i]] = c->state == PRECHARGE || (c->state == LINE && !all_line);
        u[LC_CONTACTOR[i]] = c->state == LINE || c->state == RUNNING;
    }
#else
    (void)all_pre;
    (void)all_line;
    (void)u; /* no switchgear to command */
    (void)i;
    {
        static const double nominal[RR_N_LINKS] = RR_LINK_NOMINAL_V;
        charged_v = 0.8 * nominal[0]; /* a DC-fed trainset: run once the links are up */
    }
    if (c->state == OFF && lowest_link_v(y) >= charged_v) {
        c->state = RUNNING;
    }
#endif
    return c->state == RUNNING;
}

static void control(controller *c, const rr_header *h, const double *y, double *u)
{
    double period_s = (h->period_us > 0 ? (double)h->period_us : RR_PERIOD_US) * 1e-6;
    double sum = 0.0, i_peak = 0.0, f_s, v_per_hz, amp;
    int i, k, run;
    memset(u, 0, sizeof(double) * RR_N_COMMANDS);
    /* speed from the wrapped differences of the 16-bit edge counters */
    for (i = 0; i < RR_N_MOTORS; i++) {
        uint16_t now = (uint16_t)(y_wire[MOTOR_COUNT[i]] & 0xffff);
        if (c->have_counts) {
            int d = (int)(uint16_t)(now - c->last_count[i]);
            sum += d >= 32768 ? d - 65536 : d; /* the wrapped difference, -32768..32767 */
        }
        c->last_count[i] = now;
    }
    if (c->have_counts) {
        c->speed_rad_s = sum / RR_N_MOTORS / (4.0 * RR_ENCODER_LINES) * 2.0 * PI / period_s;
    }
    c->have_counts = 1;
    run = switch_on(c, y, u, period_s);
    for (k = 0; k < RR_N_INVERTERS; k++) {
        int p;
        if (y_wire[INV_GATE_FAULT[k]] & 8) {
            c->state = FAULT; /* the gate drivers tripped: stop (this example does not reset) */
        }
        for (p = 0; p < 3; p++) {
            double i_abs = fabs(y[INV_CURRENT[p][k]]);
            i_peak = i_abs > i_peak ? i_abs : i_peak;
        }
    }
    if (h->flags & RR_FLAG_WATCHDOG) {
        c->flagged++;
    }
    /* open-loop V/f: the slip backs off while the current is past the limit */
    if (i_peak > c->current_limit_a) { /* over the limit: less slip, less voltage */
        c->slip_hz -= 20.0 * period_s;
        c->v_scale -= 2.0 * period_s;
    } else {
        c->slip_hz += c->slip_hz < c->slip_set_hz ? 2.0 * period_s : 0.0;
        c->v_scale += 0.5 * period_s;
    }
    c->v_scale = c->v_scale < 0.2 ? 0.2 : (c->v_scale > 1.0 ? 1.0 : c->v_scale);
    if (c->slip_hz < 0.0) {
        c->slip_hz = 0.0;
    }
    f_s = RR_POLE_PAIRS * c->speed_rad_s / (2.0 * PI) + c->slip_hz;
    v_per_hz = RR_RATED_VOLTAGE_V * sqrt(2.0 / 3.0) / RR_RATED_FREQUENCY_HZ; /* phase peak */
    amp = c->v_scale * (0.03 * RR_RATED_VOLTAGE_V * sqrt(2.0 / 3.0) /* with a boost */
                        + v_per_hz * fabs(f_s));
    c->theta = fmod(c->theta + 2.0 * PI * f_s * period_s, 2.0 * PI);
    for (k = 0; k < RR_N_INVERTERS; k++) {
        double udc = y[LINK_VOLTAGE[INV_LINK[k]]];
        double m = (run && c->state == RUNNING && udc > 100.0) ? amp / (0.5 * udc) : 0.0;
        int p;
        m = m > 0.95 ? 0.95 : m;
        for (p = 0; p < 3; p++) {
            u[INV_DUTY[p][k]] = 0.5 + 0.5 * m * cos(c->theta - p * 2.0 * PI / 3.0);
        }
        u[INV_GATES[k]] = m > 0.0;
    }
}

/* ---- telegrams ---- */

#define UNREADABLE (-3) /* answer(): a telegram to drop (counted), not a reason to stop */
#define MISMATCH_RUN_MAX 3 /* another protocol or map this often in a row: stop */

/* A telegram from the rig answered into out: its length; UNREADABLE for one that passed
 * the framing but not the codec (on a noisy line the CRC-16 lets about one spoiled frame
 * in 65 536 through), or for another protocol or map once in a while; -2 (stop) for
 * another protocol or map at the first telegram or MISMATCH_RUN_MAX times in a row. */
static int answer(controller *c, const uint8_t *in, size_t len, uint8_t *out, size_t cap,
                  int verbose)
{
    static int64_t u_wire[RR_N_COMMANDS];
    double y[RR_N_MEASUREMENTS], u[RR_N_COMMANDS];
    rr_header h, reply;
    int i, rc = rr_decode_telegram(in, len, &h, y_wire, RR_N_MEASUREMENTS);
    if (rc != RR_OK) {
        c->unreadable++;
        if (verbose) {
            fprintf(stderr, "example_controller: dropped a telegram it cannot read "
                    "(code %d)\n", rc);
        }
        return UNREADABLE;
    }
    if (h.protocol_version != RR_PROTOCOL_VERSION || h.map_digest != (int64_t)RR_MAP_DIGEST) {
        c->unreadable++;
        if (c->answered > 0 && ++c->mismatch_run < MISMATCH_RUN_MAX) {
            return UNREADABLE;
        }
        if (h.protocol_version != RR_PROTOCOL_VERSION) {
            fprintf(stderr, "example_controller: the rig speaks protocol %lld, this kit "
                    "%d: generate the kit again\n", (long long)h.protocol_version,
                    RR_PROTOCOL_VERSION);
        } else {
            fprintf(stderr, "example_controller: the rig's signal map has digest 0x%08llX, "
                    "this kit's is 0x%08lX: generate the kit again from the rig's trainset "
                    "profile\n", (unsigned long long)h.map_digest,
                    (unsigned long)RR_MAP_DIGEST);
        }
        return -2;
    }
    c->mismatch_run = 0;
    if (h.sequence == c->last_sequence && c->last_reply_len <= cap) {
        /* said again: our answer was lost. The same answer; the control ran already */
        c->repeated++;
        memcpy(out, c->last_reply, c->last_reply_len);
        return (int)c->last_reply_len;
    }
    for (i = 0; i < RR_N_MEASUREMENTS; i++) {
        y[i] = (double)y_wire[i] * Y_SCALE[i];
    }
    control(c, &h, y, u);
    for (i = 0; i < RR_N_COMMANDS; i++) {
        double x = u[i] < U_LO[i] ? U_LO[i] : (u[i] > U_HI[i] ? U_HI[i] : u[i]);
        double w = floor(x / U_SCALE[i] + 0.5);
        u_wire[i] = (int64_t)w;
        if ((double)u_wire[i] * U_SCALE[i] > U_HI[i]) {
            u_wire[i]--; /* rounding must not step past the range */
        }
        if ((double)u_wire[i] * U_SCALE[i] < U_LO[i]) {
            u_wire[i]++;
        }
    }
    reply.protocol_version = RR_PROTOCOL_VERSION;
    reply.sequence = h.sequence; /* the measurement this command answers */
    reply.time_us = 0;
    reply.period_us = 0;
    reply.flags = 0;
    reply.map_digest = RR_MAP_DIGEST; /* the rig refuses commands built for another map */
    c->answered++;
    if (verbose && c->answered % 1000 == 0) {
        printf("frame %lld: %s, speed %.1f rad/s, slip %.2f Hz\n", (long long)h.sequence,
               STATE_NAMES[c->state], c->speed_rad_s, c->slip_hz);
    }
    rc = rr_encode_telegram(out, cap, &reply, u_wire, RR_N_COMMANDS);
    if (rc > 0 && (size_t)rc <= sizeof c->last_reply) {
        memcpy(c->last_reply, out, (size_t)rc);
        c->last_reply_len = (size_t)rc;
        c->last_sequence = h.sequence;
    }
    return rc;
}

/* A repeat request: the last answer with the request bit (its values are not applied,
 * but they must be valid). Returns its length, or 0 before the first answer. */
static int repeat_request(controller *c, uint8_t *out, size_t cap)
{
    rr_header h;
    int64_t u_wire[RR_N_COMMANDS];
    if (c->last_reply_len == 0
        || rr_decode_telegram(c->last_reply, c->last_reply_len, &h, u_wire, RR_N_COMMANDS)
               != RR_OK) {
        return 0;
    }
    h.flags = RR_CFLAG_REPEAT_REQUEST;
    c->repeat_requests++;
    return rr_encode_telegram(out, cap, &h, u_wire, RR_N_COMMANDS);
}

/* ---- transports ---- */

/* How long to wait for a telegram: the first may take a minute (a rig's first start
 * after install compiles its plant before it sends), later ones 10 s. */
static int silence_ms(const controller *c)
{
    return c->answered == 0 ? 120000 : 10000;
}

/* Wait until fd has bytes; 0 (and says so) when the rig stays silent too long. */
static int readable(int fd, const controller *c)
{
    struct pollfd p;
    p.fd = fd;
    p.events = POLLIN;
    if (poll(&p, 1, silence_ms(c)) <= 0) {
        fprintf(stderr, "example_controller: no telegram from the rig for %d s\n",
                silence_ms(c) / 1000);
        return 0;
    }
    return 1;
}

static int resolve(const char *spec, struct sockaddr_storage *addr, socklen_t *len)
{
    char host[256];
    const char *colon = strrchr(spec, ':');
    struct addrinfo hints, *res = NULL;
    size_t n;
    if (colon == NULL || (n = (size_t)(colon - spec)) == 0 || n >= sizeof host) {
        return -1;
    }
    memcpy(host, spec, n);
    host[n] = '\0';
    memset(&hints, 0, sizeof hints);
    hints.ai_family = AF_UNSPEC;
    hints.ai_socktype = SOCK_DGRAM;
    if (getaddrinfo(host, colon + 1, &hints, &res) != 0 || res == NULL) {
        return -1;
    }
    memcpy(addr, res->ai_addr, res->ai_addrlen);
    *len = res->ai_addrlen;
    freeaddrinfo(res);
    return 0;
}

static int run_udp(controller *c, const char *bind_spec, const char *rig_spec,
                   unsigned long frames, int verbose)
{
    struct sockaddr_storage me, rig;
    socklen_t me_len, rig_len;
    uint8_t in[4096], out[4096];
    int fd;
    if (resolve(bind_spec, &me, &me_len) != 0 || resolve(rig_spec, &rig, &rig_len) != 0) {
        fprintf(stderr, "example_controller: cannot resolve %s or %s\n", bind_spec, rig_spec);
        return 2;
    }
    fd = socket(me.ss_family, SOCK_DGRAM, 0);
    if (fd < 0 || bind(fd, (struct sockaddr *)&me, me_len) != 0) {
        perror("example_controller: bind");
        return 2;
    }
    while (c->answered < frames) {
        ssize_t got;
        int n;
        if (!readable(fd, c)) {
            close(fd);
            return 1;
        }
        got = recv(fd, in, sizeof in, 0);
        if (got < 0) {
            continue;
        }
        n = answer(c, in, (size_t)got, out, sizeof out, verbose);
        if (n == UNREADABLE) {
            continue; /* the rig says its measurement again after silence */
        }
        if (n < 0) {
            close(fd);
            return n == -2 ? 2 : 1;
        }
        if (sendto(fd, out, (size_t)n, 0, (struct sockaddr *)&rig, rig_len) < 0) {
            perror("example_controller: sendto");
        }
    }
    close(fd);
    return 0;
}

static speed_t baud_constant(long baud)
{
    switch (baud) {
    case 9600: return B9600;
    case 19200: return B19200;
    case 38400: return B38400;
    case 57600: return B57600;
    case 115200: return B115200;
    case 230400: return B230400;
#ifdef B460800
    case 460800: return B460800;
#endif
#ifdef B921600
    case 921600: return B921600;
#endif
#ifdef B2000000
    case 2000000: return B2000000;
#endif
#ifdef B3000000
    case 3000000: return B3000000;
#endif
    default: return 0;
    }
}

static int write_all(int fd, const uint8_t *buf, size_t len)
{
    while (len > 0) {
        ssize_t n = write(fd, buf, len);
        if (n < 0) {
            if (errno == EINTR || errno == EAGAIN) {
                continue;
            }
            return -1;
        }
        buf += n;
        len -= (size_t)n;
    }
    return 0;
}

/* One frame for the line: plain, or with fec parity bytes a block (railrig_fec.h). */
static int frame_out(const uint8_t *payload, size_t len, unsigned fec, uint8_t *out,
                     size_t cap)
{
    return fec ? rr_fec_frame_encode(payload, len, fec, out, cap)
               : rr_frame_encode(payload, len, out, cap);
}

static int run_serial(controller *c, const char *device, long baud, unsigned fec,
                      unsigned long frames, int verbose)
{
    static rr_rx rx;
    struct termios tio;
    uint8_t chunk[512], out[4096], framed[RR_RX_CAP + 1];
    speed_t speed = baud_constant(baud);
    int fd = open(device, O_RDWR | O_NOCTTY);
    if (fd < 0) {
        perror("example_controller: open");
        return 2;
    }
    if (speed == 0) {
        fprintf(stderr, "example_controller: baud %ld not supported here\n", baud);
        close(fd);
        return 2;
    }
    if (tcgetattr(fd, &tio) == 0) { /* raw 8N1 */
        tio.c_iflag &= ~(tcflag_t)(IGNBRK | BRKINT | PARMRK | ISTRIP | INLCR | IGNCR | ICRNL
                                   | IXON | IXOFF);
        tio.c_oflag &= ~(tcflag_t)OPOST;
        tio.c_lflag &= ~(tcflag_t)(ECHO | ECHONL | ICANON | ISIG | IEXTEN);
        tio.c_cflag &= ~(tcflag_t)(CSIZE | PARENB | CSTOPB);
        tio.c_cflag |= CS8 | CLOCAL | CREAD;
        tio.c_cc[VMIN] = 1;
        tio.c_cc[VTIME] = 0;
        cfsetispeed(&tio, speed);
        cfsetospeed(&tio, speed);
        tcsetattr(fd, TCSANOW, &tio);
    }
    rr_rx_init(&rx);
    rx.fec = fec;
    while (c->answered < frames) {
        ssize_t got, i;
        if (!readable(fd, c)) {
            close(fd);
            return 1;
        }
        got = read(fd, chunk, sizeof chunk);
        if (got <= 0 && !(got < 0 && (errno == EINTR || errno == EAGAIN))) {
            fprintf(stderr, "example_controller: the serial line closed\n");
            close(fd);
            return 1;
        }
        for (i = 0; i < got; i++) {
            int n = 0, m, ask_again = 0;
            unsigned long damaged = (unsigned long)rx.crc_errors + rx.cobs_errors
                                    + rx.oversized + rx.fec_failures;
            if (!rr_rx_push(&rx, chunk[i])) {
                /* a damaged frame from the rig: ask for the measurement again */
                ask_again = (unsigned long)rx.crc_errors + rx.cobs_errors + rx.oversized
                            + rx.fec_failures != damaged;
            } else {
                n = answer(c, rx.payload, rx.length, out, sizeof out, verbose);
                ask_again = n == UNREADABLE; /* as a damaged frame */
                if (n < 0 && !ask_again) {
                    close(fd);
                    return n == -2 ? 2 : 1;
                }
            }
            if (ask_again) {
                n = repeat_request(c, out, sizeof out); /* 0 before the first answer */
            }
            if (n <= 0) {
                continue;
            }
            m = frame_out(out, (size_t)n, fec, framed, sizeof framed);
            if (m < 0 || write_all(fd, framed, (size_t)m) != 0) {
                perror("example_controller: write");
                close(fd);
                return 1;
            }
            if (c->answered >= frames) {
                break;
            }
        }
    }
    if (verbose || rx.crc_errors || rx.cobs_errors || rx.oversized || rx.fec_failures) {
        printf("serial: %lu frames, %lu CRC errors, %lu COBS errors, %lu oversized",
               (unsigned long)rx.frames, (unsigned long)rx.crc_errors,
               (unsigned long)rx.cobs_errors, (unsigned long)rx.oversized);
        if (fec) {
            printf(", %lu past FEC mending, %lu mended", (unsigned long)rx.fec_failures,
                   (unsigned long)rx.fec_mended);
        }
        fputc('\n', stdout);
    }
    close(fd);
    return 0;
}

static void usage(void)
{
    fprintf(stderr,
            "usage: example_controller --bind HOST:PORT --rig HOST:PORT --frames N\n"
            "       example_controller --serial DEVICE --baud N [--fec P] --frames N\n"
            "       [--slip-hz F] [--current-limit-a A] [--quiet]\n");
}

int main(int argc, char **argv)
{
    const char *bind_spec = NULL, *rig_spec = NULL, *device = NULL;
    long baud = 115200;
    long fec = 0;
    unsigned long frames = 0;
    int verbose = 1, i, rc;
    controller c;
    memset(&c, 0, sizeof c);
    c.state = OFF;
    c.last_sequence = -1;
    c.slip_set_hz = 1.5;
    c.v_scale = 1.0;
    c.current_limit_a = 0.6 * RR_INVERTER_TRIP_A;
    if (!(c.current_limit_a < 1e9)) {
        c.current_limit_a = 500.0; /* a profile without a trip level */
    }
    for (i = 1; i < argc; i++) {
        const char *a = argv[i];
        const char *v = i + 1 < argc ? argv[i + 1] : NULL;
        if (strcmp(a, "--quiet") == 0) {
            verbose = 0;
            continue;
        }
        if (v == NULL) {
            usage();
            return 2;
        }
        if (strcmp(a, "--bind") == 0) {
            bind_spec = v;
        } else if (strcmp(a, "--rig") == 0) {
            rig_spec = v;
        } else if (strcmp(a, "--serial") == 0) {
            device = v;
        } else if (strcmp(a, "--baud") == 0) {
            baud = strtol(v, NULL, 10);
        } else if (strcmp(a, "--fec") == 0) {
            char *end;
            fec = strtol(v, &end, 10);
            if (end == v || *end != '\0' || fec < 0 || fec > RR_FEC_MAX || fec % 2 != 0) {
                fprintf(stderr, "example_controller: --fec is 0 or an even number 2..%d\n",
                        RR_FEC_MAX);
                return 2;
            }
        } else if (strcmp(a, "--frames") == 0) {
            frames = strtoul(v, NULL, 10);
        } else if (strcmp(a, "--slip-hz") == 0) {
            c.slip_set_hz = strtod(v, NULL);
        } else if (strcmp(a, "--current-limit-a") == 0) {
            c.current_limit_a = strtod(v, NULL);
        } else {
            usage();
            return 2;
        }
        i++;
    }
    if (frames == 0 || (device == NULL && (bind_spec == NULL || rig_spec == NULL))) {
        usage();
        return 2;
    }
    c.slip_hz = 0.0;
    rc = device != NULL ? run_serial(&c, device, baud, (unsigned)fec, frames, verbose)
                        : run_udp(&c, bind_spec, rig_spec, frames, verbose);
    printf("answered %lu frames, state %s, speed %.2f rad/s, watchdog flags seen %lu, "
           "repeats answered %lu, repeat requests %lu, unreadable telegrams %lu\n",
           c.answered, STATE_NAMES[c.state], c.speed_rad_s, c.flagged, c.repeated,
           c.repeat_requests, c.unreadable);
    return rc;
}
