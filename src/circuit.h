/* src/circuit.h: the circuit: node table, elements, directives, and their validation */
#ifndef TB_CIRCUIT_H
#define TB_CIRCUIT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "names.h"
#include "tbeta.h"

/* Hard limits, each reported by name when passed. */
#define TB_MAX_NODES ((size_t)50000000)
#define TB_MAX_ELEMENTS ((size_t)50000000)
_Static_assert(TB_MAX_NODES < TB_NAMES_MAX && TB_MAX_ELEMENTS < TB_NAMES_MAX, "name slots hold 32-bit indices");
#define TB_MAX_LOOPS ((size_t)10000)

typedef enum {
    TB_EL_R,
    TB_EL_C,
    TB_EL_L,
    TB_EL_V,
    TB_EL_I,
    TB_EL_E,
    TB_EL_G,
    TB_EL_F,
    TB_EL_H,
    TB_EL_K, /* mutual inductance between two inductors */
    TB_EL_COUNT
} tb_elem_kind;

/* A place in the netlist: file, 1-based line and column. */
typedef struct {
    const char *file; /* owned by the circuit */
    int line;
    int col;
} tb_loc;

/* One element card. Nodes are indices into the node table, 0 = ground:
 * node[0] = n+, node[1] = n-, node[2] = nc+, node[3] = nc- (E, G). */
typedef struct {
    tb_elem_kind kind;
    const char *name;       /* as written; owned by the circuit */
    int node[4];
    const char *ctrl_name;  /* F, H: the sensing V source as written; K: the first inductor */
    const char *ctrl2_name; /* K: the second inductor as written, else NULL */
    size_t ctrl;            /* F, H, K: its element index (set by tb_circuit_finish) */
    size_t ctrl2;           /* K: the second inductor's index (set by tb_circuit_finish) */
    double value;           /* R, C, L: ohms, farads, henries; E, G, F, H: gain; K: coupling */
    double dc;              /* V, I: DC value */
    double ac_mag;          /* V, I: AC magnitude */
    double ac_phase_deg;    /* V, I: AC phase in degrees */
    long branch;            /* MNA branch index for V, L, E, H (set by tb_circuit_finish), else -1 */
    tb_loc loc;             /* where the card starts */
    double k2;              /* E, G, F, H: y = k x + k2 x^2 + k3 x^3 (k2=, k3= on the card; */
    double k3;              /* nonlinear.c, docs/distortion.md), 0 when linear */
} tb_element;

/* An element named like an earlier one (reported by tb_circuit_finish). */
typedef struct {
    size_t elem;
    size_t first; /* the first element of that name */
} tb_same_name;

/* Room for the name hashes of the elements waiting for the name index (circuit.c). */
#define TB_ELEM_HASH_RING 32

typedef enum { TB_GRID_DEC, TB_GRID_OCT, TB_GRID_LIN } tb_grid_kind;

typedef struct {
    bool given;
    tb_grid_kind kind;
    long points;
    double fstart;
    double fstop;
    tb_loc loc;
} tb_ac_spec;

typedef struct {
    const char *source; /* name as written */
    size_t elem;        /* element index (set by tb_circuit_finish) */
    tb_loc loc;
} tb_loop_spec;

typedef enum { TB_OUT_V, TB_OUT_I } tb_out_kind;

typedef struct {
    bool given;
    const char *source;   /* the independent input source as written */
    size_t source_elem;   /* set by tb_circuit_finish */
    tb_out_kind out_kind; /* v(n1[,n2]) or i(Vname) */
    const char *out_a;    /* node n1 or the V source name */
    const char *out_b;    /* node n2 or NULL */
    int out_node[2];      /* resolved nodes (0 = ground) */
    size_t out_elem;      /* resolved V source for i() */
    tb_loc loc;
    tb_loc out_loc;
} tb_io_spec;

/* One source text the circuit was read from (the netlist and each included
 * file), kept so that any later diagnostic can quote its lines. */
typedef struct {
    const char *file; /* interned name, as in tb_loc */
    char *text;       /* owned by the circuit (by this entry when owned, else by an earlier one) */
    size_t len;
    bool owned;
} tb_source;

/* .margins: the netlist's own stability thresholds (either may be absent). */
typedef struct {
    bool given;
    bool has_pm;
    double pm_min_deg;
    bool has_gm;
    double gm_min_db;
    tb_loc loc;
} tb_margin_spec;

/* .ideal: the designer's hand estimate of the closed-loop gain (docs/feedback.md). */
typedef struct {
    bool given;
    bool as_beta;      /* stated as beta=: the estimate is 1/beta */
    double value;      /* as stated (gain, or beta) */
    bool has_tol;
    double tol_pct;    /* the estimate holds while |A - estimate| <= tol_pct % of it */
    bool has_spread;
    double spread_pct; /* amplifier-gain spread of the desensitivity check, +- percent */
    tb_loc loc;
} tb_ideal_spec;

/* .zport: a node pair whose impedance is reported with and without feedback (impedance.c). */
#define TB_MAX_ZPORTS 16
typedef struct {
    const char *name;   /* label as written ("in" and "out" also classify the feedback) */
    const char *node_a; /* the port's + node as written */
    const char *node_b; /* its - node, or NULL for ground */
    bool at_source;     /* i(V): the port is V's terminal pair as the source sees it; node_a
                         * holds the source's name */
    int a;              /* node_a's index (0 = ground; set by tb_circuit_finish; 0 for i(V)) */
    int b;              /* node_b's index (0 = ground or absent; set likewise; 0 for i(V)) */
    size_t source_elem; /* i(V): V's element index (set by tb_circuit_finish) */
    tb_loc loc;
} tb_zport_spec;

/* .break: a zero-volt V source in a loop wire, where the loop gain is found by
 * double injection (wirebreak.c). */
typedef struct {
    bool given;
    const char *source; /* as written */
    size_t elem;        /* the V source's element index (set by tb_circuit_finish) */
    tb_loc loc;
} tb_break_spec;

/* .volterra: weakly nonlinear distortion at a stated input amplitude and tone (distortion.c). */
typedef struct {
    bool given;
    double amp;       /* input amplitude per tone, peak, in the .io source's unit */
    double freq_hz;   /* the tone (harmonics), and the first of the two tones (intermodulation) */
    double freq2_hz;  /* the second tone, freq_hz < freq2_hz < 2 freq_hz */
    double limit_pct; /* validity: a third-order output term above this % of the fundamental */
    tb_loc loc;
} tb_volterra_spec;

struct tb_circuit {
    char *title;
    const char *file;       /* interned netlist name */
    /* node table: names[0] is ground */
    const char **node_names;
    size_t node_count;
    size_t node_cap;
    tb_name_index node_index;
    tb_element *elems;
    size_t elem_count;
    size_t elem_cap;
    tb_name_index elem_index;
    tb_ac_spec ac;
    tb_loop_spec *loops;
    size_t loop_count;
    size_t loop_cap;
    tb_io_spec io;
    tb_margin_spec margins;
    struct tb_expect *expects;     /* .expect cards in netlist order (src/expect.h), in the string arena */
    struct tb_expect *expect_last;
    size_t expect_count;
    tb_ideal_spec ideal;    /* .ideal (feedback.c) */
    tb_zport_spec zports[TB_MAX_ZPORTS]; /* .zport (impedance.c) */
    size_t zport_count;
    tb_break_spec brk;      /* .break (wirebreak.c) */
    size_t branch_count;    /* set by tb_circuit_finish */
    bool dc_singular;       /* set by tb_circuit_finish: M(0) is singular by structure (warned) */
    tb_source *sources;     /* every text read, in reading order */
    size_t source_count;
    size_t source_cap;
    struct tb_strblock *strings; /* string arena */
    tb_volterra_spec volterra;   /* .volterra (distortion.c) */
    struct tb_spread_cards *spread; /* .spread and .scan cards (spreadcard.h), in the arena; NULL: none */
    tb_name_recent node_recent;  /* nodes found or added last, for tb_circuit_node */
    size_t elem_indexed;         /* elems[0..elem_indexed) are in elem_index, the rest follow
                                  * (tb_circuit_add_element, at the latest tb_circuit_finish) */
    struct tb_params *params;       /* the parameters and the element values they set (paramdep.h); NULL: none */
    uint32_t elem_hash[TB_ELEM_HASH_RING]; /* name hashes of the elements not yet in elem_index,
                                             * element i at i % TB_ELEM_HASH_RING */
    tb_same_name *same_names;    /* elements named like an earlier one, in element order */
    size_t same_name_count;
    size_t same_name_cap;
};

tb_status tb_circuit_create(const char *file, tb_circuit **out);
/* Copies s[0..len) into the circuit's string arena; NULL when out of memory. */
const char *tb_circuit_intern(tb_circuit *ckt, const char *s, size_t len);
/* Index of node name[0..len), created when new ("0" and "gnd" are ground). */
tb_status tb_circuit_node(tb_circuit *ckt, const char *name, size_t len, int *index);
/* Index of an existing node; false when there is none (no node is created). */
bool tb_circuit_find_node(const tb_circuit *ckt, const char *name, size_t len, int *index);
/* Element index by name (case-insensitive); false when there is none. Elements
 * are found once tb_circuit_finish has run. */
bool tb_circuit_find_element(const tb_circuit *ckt, const char *name, size_t *index);
/* Appends a copy of *elem (its strings must already be interned). An element
 * of the same name may exist already: tb_circuit_finish reports duplicates. The
 * element enters the name index (or the list of same names) a few elements later,
 * its slot fetched meanwhile, or in tb_circuit_finish. */
tb_status tb_circuit_add_element(tb_circuit *ckt, const tb_element *elem);
tb_status tb_circuit_add_loop(tb_circuit *ckt, const tb_loop_spec *loop);
/* Hands the circuit a source text read under the name file: the circuit owns
 * text (a tb_malloc'd buffer of len bytes, need not end in NUL) from this call
 * on, also when it fails (TB_ERR_NOMEM, text freed). *file_out, when not
 * NULL, receives the interned name used in tb_loc. */
tb_status tb_circuit_add_source(tb_circuit *ckt, const char *file, char *text, size_t len,
                                const char **file_out);
/* Records that a text the circuit holds already (from tb_circuit_add_source) is
 * also read under the name file: an included file named through another path is
 * read once, and later messages quote it under either name. *file_out as above. */
tb_status tb_circuit_add_source_alias(tb_circuit *ckt, const char *file, const char *text, size_t len,
                                      const char **file_out);
/* Physical line `line` (1-based) of the source text read as `file` (compared
 * by content; the latest source of that name wins), without its line end;
 * its length goes to *len. NULL when there is no such file or line. */
const char *tb_circuit_source_line(const tb_circuit *ckt, const char *file, int line, size_t *len);
/* Resolves references and checks the whole circuit after parsing: duplicate
 * names, .loop/.io/.zport/.break/F/H/K references, a default .ac grid (with a
 * warning), branch numbering. Source lines are quoted through tb_circuit_source_line.
 * Errors go to diag; TB_ERR_INPUT if any. */
tb_status tb_circuit_finish(tb_circuit *ckt, tb_diag *diag);
/* true for the controlled sources E, G, F, H (the ones a loop can be broken at). */
bool tb_elem_is_controlled(tb_elem_kind kind);
/* "resistor", "voltage-controlled voltage source" and the like. */
const char *tb_elem_kind_word(tb_elem_kind kind);
/* What element e stands for in the circuit as drawn: for the transconductances a Q or M card
 * expands to (device.c names them Q1, X1.M3 and M3.gmb), the device's part ("gm of a bipolar
 * transistor"); for every other element tb_elem_kind_word(e->kind). */
const char *tb_elem_role_word(const tb_element *e);

#endif
