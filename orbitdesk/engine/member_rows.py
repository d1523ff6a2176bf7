"""The rows of ``MS``, the per-member scalars of the members in flight (members.py, members_fixed.py,
members_numpy.py, the drivers), and the verdicts of a round's first pass."""

R_T, R_H, R_ACC, R_REJ, R_LASTREJ, R_END, R_SAMP, R_FULL, R_NEV, R_ISTART, R_GI, R_STEP, R_CLAMP, R_HTRY = range(14)
R_ID, R_TARGET, R_MIN, R_GIVE_UP = 14, 15, 16, 17  # R_GIVE_UP: set by the driver (its pace, drivers._Pace)
R_VERDICT, R_CODE = 18, 19  # members._judge_round's verdict on the member's step, and its status code
MS_ROWS = 20
# verdicts: nothing more to do this round (0: a member entering afresh has it), look at the step one by one,
# the member ends (with the code in R_CODE)
V_PASSED, V_LOOK, V_END = 0.0, 1.0, 2.0
# BS: [members in flight, next member to start, members finished]
