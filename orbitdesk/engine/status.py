"""The status vocabulary of every run: one table between the words people read and the integer
codes compiled loops return.

A run, an ensemble member or an analysis ends in one of these states; results carry the word
(``Trajectory.status``, ``EnsembleResult.status``), compiled loops write the code.
"""

from __future__ import annotations

import numpy as np

# code, word, what it means in plain words
TABLE = (
    (0, "ok", "finished normally"),
    (1, "diverged", "a state passed the bound or became infinite"),
    (2, "undefined", "an expression of the model was undefined (not a number)"),
    (3, "step_failed", "the adaptive step size collapsed or the step budget ran out"),
    (4, "cancelled", "stopped on request"),
    (5, "stopped", "ended by an event of the model ('when ... then stop')"),
    (6, "chattering", "events came faster than the limit on events per unit time (Zeno behaviour or chattering)"),
    (7, "refused", "the analysis does not apply to this model; the message says why"),
    (8, "singular", "the Newton matrix was singular and no regularised step lowered the residual"),
    (9, "stalled", "no Newton step lowered the residual (a minimum that is no root), or the iterations ran out"),
)
OK, DIVERGED, UNDEFINED, STEP_FAILED, CANCELLED, STOPPED, CHATTERING, REFUSED, SINGULAR, STALLED = (
    word for _, word, _ in TABLE)
CODE = {word: code for code, word, _ in TABLE}
WORD = {code: word for code, word, _ in TABLE}
MEANING = {word: meaning for _, word, meaning in TABLE}
(C_OK, C_DIVERGED, C_UNDEFINED, C_STEP_FAILED, C_CANCELLED, C_STOPPED, C_CHATTERING,
 C_REFUSED, C_SINGULAR, C_STALLED) = (code for code, _, _ in TABLE)
WIDTH = "<U" + str(max(len(word) for word in WORD.values()))


def words(codes) -> np.ndarray:
    """The words for an array of codes (an array of strings of the same shape)."""
    codes = np.asarray(codes)
    out = np.full(codes.shape, OK, dtype=WIDTH)
    for code, word, _ in TABLE[1:]:
        out[codes == code] = word
    return out


def word(code: int) -> str:
    return WORD[int(code)]


__all__ = ["TABLE", "OK", "DIVERGED", "UNDEFINED", "STEP_FAILED", "CANCELLED", "STOPPED", "CHATTERING", "REFUSED", "SINGULAR", "STALLED", "CODE", "WORD", "MEANING",
           "C_OK", "C_DIVERGED", "C_UNDEFINED", "C_STEP_FAILED", "C_CANCELLED", "C_SINGULAR", "C_STALLED", "WIDTH", "words", "word"]
