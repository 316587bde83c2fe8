/* src/topology.h: structural checks before solving: floating nodes, source loops, dangling nodes */
#ifndef TB_TOPOLOGY_H
#define TB_TOPOLOGY_H

#include <stdbool.h>

#include "circuit.h"

/* At most this many diagnostics of each kind; the rest are counted in one more. */
#define TB_TOPOLOGY_MAX_REPORTS 10

/* Receives one diagnostic: severity, the culprit's card (or {file, 0, 0} for
 * the whole file) and the message text. */
typedef void (*tb_topology_sink)(void *ctx, tb_severity sev, tb_loc loc, const char *message);

/* Finds, with union-find over the nodes (O(elements * alpha) time, O(nodes +
 * elements) memory, no recursion), the structures that make the circuit
 * matrix singular whatever the element values, and reports each through sink,
 * naming the nodes and elements at fault:
 *   errors (singular at every frequency):
 *     - no element touches ground;
 *     - a group of nodes whose voltage nothing fixes relative to ground: it is
 *       tied to the rest only through current sources (I and the outputs of G
 *       and F), so a common shift of its voltages changes no equation;
 *     - a group of nodes into which no current can flow except from current
 *       sources: it is attached otherwise only to E/G controlling inputs,
 *       which draw no current, so its KCL rows add up to zero;
 *     - a loop of V sources and E/H outputs (the current around it is free);
 *   warnings (singular at DC only; *dc_singular is set):
 *     - the same groups when capacitors are open (no DC path to ground);
 *     - a loop of voltage sources and inductors, or of inductors alone;
 *   warnings (suspicious, harmless to the matrix):
 *     - a node touched by one R, C, L, I, G or F terminal only, sensed by no
 *       controlling input and not the .io output (a voltage-source output
 *       left open, such as a measurement E source, is fine).
 * Loops that contain an E or H output and a V source whose current an F or H
 * senses are not reported: such a loop need not be singular.
 * Requires resolved references (F/H sensing sources), i.e. a circuit that
 * passed the reference checks of tb_circuit_finish, and at least one node
 * besides ground. Errors: TB_ERR_NOMEM (nothing more is reported). */
tb_status tb_topology_check(const tb_circuit *ckt, tb_topology_sink sink, void *ctx,
                            bool *dc_singular);

#endif
