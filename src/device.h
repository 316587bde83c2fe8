/* src/device.h: transistors at a bias point (Q and M cards) expanded into their small-signal
 * parts, and the refusal of cards that are not small-signal (models by name, D, S, W, B, J) */
#ifndef TB_DEVICE_H
#define TB_DEVICE_H

#include <stdbool.h>
#include <stddef.h>

#include "circuit.h"
#include "lex.h"
#include "tbeta.h"

#define TB_DEVICE_MAX_NODES 4 /* c b e s, d g s b */
#define TB_DEVICE_MAX_KEYS 24 /* more keys on one card is an error (each key once) */
#define TB_DEVICE_MAX_PARTS 8 /* elements one device expands to */
#define TB_DEVICE_MESSAGE 400

/* One KEY=value pair as written. */
typedef struct {
    tb_token key;
    tb_token at; /* the value (for messages) */
    double value;
} tb_device_key;

/* A Q or M card read by the parser: its nodes resolved in the card's scope, its values
 * evaluated. */
typedef struct {
    const char *name;  /* interned hierarchical name ("X1.Q1"); the transconductance's name */
    const char *label; /* the name for messages, quoted and escaped by the parser */
    tb_token first;    /* the name token */
    int node[TB_DEVICE_MAX_NODES];
    tb_token node_tok[TB_DEVICE_MAX_NODES];
    size_t node_count;
    tb_device_key keys[TB_DEVICE_MAX_KEYS];
    size_t key_count;
    tb_loc loc;
} tb_device_card;

/* The elements a device stands for (names interned in the circuit). */
typedef struct {
    tb_element part[TB_DEVICE_MAX_PARTS];
    size_t count;
} tb_device_parts;

/* A refusal: the message and the token it stands at. */
typedef struct {
    tb_token at;
    char message[TB_DEVICE_MESSAGE];
} tb_device_error;

/* The card's name, the words after it up to its first KEY=, and whether keys follow:
 * TB_OK when the node count fits the device; TB_ERR_INPUT with *err otherwise (a model
 * named instead of parameters, no keys, too few or too many nodes). label as in
 * tb_device_card. */
tb_status tb_device_shape(const char *label, const tb_token *name, const tb_token *words,
                          size_t word_count, bool has_keys, tb_device_error *err);

/* Expands card into *out: the transconductance (named as the card), resistors and
 * capacitors named "NAME.part", an internal node "NAME.bi" when the base resistance is
 * given. TB_ERR_INPUT with *err for a missing, unknown, repeated or impossible key;
 * TB_ERR_NOMEM. */
tb_status tb_device_expand(tb_circuit *ckt, const tb_device_card *card, tb_device_parts *out,
                           tb_device_error *err);

/* For an element name whose letter starts a card that is not small-signal (D S W B J):
 * true and the message in buf (label is the name for messages); false otherwise. */
bool tb_device_refusal(const char *label, char letter, char *buf, size_t size);

#endif
