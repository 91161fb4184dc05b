/* The one clock of the program: monotonic seconds, for time budgets, deadlines and durations. */
#ifndef BANDSIEVE_CLOCK_H
#define BANDSIEVE_CLOCK_H

/* Seconds of CLOCK_MONOTONIC (an arbitrary origin: only differences and deadlines made from it
 * mean anything). */
double bs_now(void);

#endif
