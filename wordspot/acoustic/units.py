"""Unit inventory and the topology and transition parameters of every unit.

A *unit* is a sub-word sound model: one per phone of the lexicon, plus two of our own:

* ``quiet`` (:data:`PAUSE_UNIT`): silence and background before, between and after words.
  Three states; the first may skip to the last and the last may return to the first,
  so any length of silence fits.
* ``gap`` (:data:`GAP_UNIT`): an optional one-state short pause between words, which
  may be skipped entirely. Its state shares the middle pause state's mixture.

Every unit has at most :data:`MAX_STATES` emitting states. Its transitions are held as
``trans[u]`` of shape ``(MAX_STATES, MAX_STATES + 1)``: row ``i`` gives the probability
of going from state ``i`` to state ``j`` (columns ``0..n-1``) or leaving the unit (column
``n``, written at index ``MAX_STATES``), and ``entry[u]`` of shape ``(MAX_STATES + 1,)``:
the probability of entering at state ``j`` or skipping the unit altogether (last
element). Rows of real states and every entry vector sum to one; padding is zero.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from wordspot.errors import ModelFileError

__all__ = [
    "PAUSE_UNIT",
    "GAP_UNIT",
    "MAX_STATES",
    "EXIT",
    "UnitSet",
    "default_unit_set",
    "n_transition_params",
    "trans_param_id",
    "entry_param_id",
]

PAUSE_UNIT = "quiet"
GAP_UNIT = "gap"
MAX_STATES = 3
EXIT = MAX_STATES  # column of ``trans`` and element of ``entry`` meaning "leave / skip"

_ROW = MAX_STATES + 1  # width of one transition row
_PER_UNIT = MAX_STATES * _ROW  # transition parameters per unit (excluding entry)

# Starting transition probabilities (common practice, no source: a self-loop a little
# above one half gives an expected stay of about 2.5 frames per state).
_PHONE_TRANS = np.array(
    [
        [0.6, 0.4, 0.0, 0.0],
        [0.0, 0.6, 0.4, 0.0],
        [0.0, 0.0, 0.6, 0.4],
    ]
)
_PAUSE_TRANS = np.array(
    [
        [0.6, 0.2, 0.2, 0.0],  # first state: stay, next, skip to last
        [0.0, 0.6, 0.4, 0.0],
        [0.1, 0.0, 0.6, 0.3],  # last state: back to first, stay, leave
    ]
)
_GAP_TRANS = np.array([[0.6, 0.0, 0.0, 0.4], [0.0] * 4, [0.0] * 4])
_GAP_ENTRY = np.array([0.5, 0.0, 0.0, 0.5])  # enter the one state, or skip it
_PLAIN_ENTRY = np.array([1.0, 0.0, 0.0, 0.0])


def trans_param_id(unit: int, src: int, dst: int) -> int:
    """Flat index of transition ``src -> dst`` of ``unit`` (``dst == EXIT`` leaves)."""
    return unit * _PER_UNIT + src * _ROW + dst


def entry_param_id(n_units: int, unit: int, dst: int) -> int:
    """Flat index of entering ``unit`` at ``dst`` (``dst == EXIT`` skips the unit)."""
    return n_units * _PER_UNIT + unit * _ROW + dst


def n_transition_params(n_units: int) -> int:
    """Length of the flat transition parameter vector for ``n_units`` units."""
    return n_units * (_PER_UNIT + _ROW)


@dataclass
class UnitSet:
    """Units with their topology, state-to-mixture tying and transition probabilities.

    Attributes
    ----------
    names : tuple of str
        Unit names; a unit's index in this tuple is its id.
    n_states : ndarray of int, shape (U,)
        Emitting states of each unit (1 to ``MAX_STATES``).
    state_mixture : ndarray of int, shape (U, MAX_STATES)
        Mixture index of each state; -1 for padding. Tied states share an index.
    trans : ndarray of float, shape (U, MAX_STATES, MAX_STATES + 1)
        Transition probabilities; last column leaves the unit.
    entry : ndarray of float, shape (U, MAX_STATES + 1)
        Entry probabilities; last element skips the unit.
    """

    names: tuple[str, ...]
    n_states: np.ndarray
    state_mixture: np.ndarray
    trans: np.ndarray
    entry: np.ndarray

    @property
    def n_units(self) -> int:
        return len(self.names)

    @property
    def n_mixtures(self) -> int:
        return int(self.state_mixture.max()) + 1

    def index(self, name: str) -> int:
        """Id of the unit called ``name``."""
        try:
            return self._lookup()[name]
        except KeyError:
            raise KeyError(f"unit {name!r} is not in this model") from None

    def __contains__(self, name: str) -> bool:
        return name in self._lookup()

    def _lookup(self) -> dict[str, int]:
        cache = getattr(self, "_ids", None)
        if cache is None or len(cache) != len(self.names):
            cache = {n: i for i, n in enumerate(self.names)}
            object.__setattr__(self, "_ids", cache)
        return cache

    def flat_params(self) -> np.ndarray:
        """All transition and entry probabilities as one vector (see ``*_param_id``)."""
        return np.concatenate([self.trans.reshape(-1), self.entry.reshape(-1)])

    def with_flat_params(self, flat: np.ndarray) -> "UnitSet":
        """A copy whose transitions and entries are taken from a flat vector."""
        n = self.n_units * _PER_UNIT
        return UnitSet(
            names=self.names,
            n_states=self.n_states.copy(),
            state_mixture=self.state_mixture.copy(),
            trans=np.asarray(flat[:n], dtype=np.float64).reshape(self.trans.shape).copy(),
            entry=np.asarray(flat[n:], dtype=np.float64).reshape(self.entry.shape).copy(),
        )

    def validate(self, source: str = "model") -> None:
        """Raise ModelFileError unless shapes agree and every row sums to one."""
        u = self.n_units
        if len(set(self.names)) != u:
            twice = sorted({n for n in self.names if self.names.count(n) > 1})
            raise ModelFileError(f"{source}: unit name(s) {', '.join(map(repr, twice))} occur more than once")
        if self.n_states.shape != (u,) or self.state_mixture.shape != (u, MAX_STATES):
            raise ModelFileError(f"{source}: unit tables have inconsistent shapes")
        if self.trans.shape != (u, MAX_STATES, _ROW) or self.entry.shape != (u, _ROW):
            raise ModelFileError(f"{source}: transition tables have inconsistent shapes")
        if np.any(self.n_states < 1) or np.any(self.n_states > MAX_STATES):
            raise ModelFileError(f"{source}: a unit has an invalid number of states")
        if not (np.all(np.isfinite(self.trans)) and np.all(np.isfinite(self.entry))):
            raise ModelFileError(f"{source}: transition probabilities are not finite")
        if np.any(self.trans < 0) or np.any(self.entry < 0):
            raise ModelFileError(f"{source}: negative transition probability")
        for k in range(u):
            n = int(self.n_states[k])
            rows = self.trans[k, :n].sum(axis=1)
            if not np.allclose(rows, 1.0, atol=1e-6) or not np.isclose(
                self.entry[k].sum(), 1.0, atol=1e-6
            ):
                raise ModelFileError(
                    f"{source}: transitions of unit {self.names[k]!r} do not sum to one"
                )
            if np.any(self.state_mixture[k, :n] < 0):
                raise ModelFileError(f"{source}: unit {self.names[k]!r} has a state with no mixture")


def default_unit_set(phones) -> UnitSet:
    """Flat-start topology for ``phones`` plus the pause and gap units.

    Parameters
    ----------
    phones : iterable of str
        Phone units (for example every unit the lexicon uses). ``quiet`` and ``gap`` are
        appended if absent.

    Returns
    -------
    UnitSet
        Phones get three left-to-right states with their own mixtures; ``quiet`` gets three
        states that can skip and return; ``gap`` gets one skippable state tied to the
        middle pause state.
    """
    names = [p for p in dict.fromkeys(phones) if p not in (PAUSE_UNIT, GAP_UNIT)]
    names += [PAUSE_UNIT, GAP_UNIT]
    u = len(names)
    n_states = np.full(u, MAX_STATES, dtype=np.int64)
    state_mixture = np.full((u, MAX_STATES), -1, dtype=np.int64)
    trans = np.zeros((u, MAX_STATES, _ROW))
    entry = np.zeros((u, _ROW))
    first_id = 0
    for k, name in enumerate(names[:-1]):  # phones and the pause
        state_mixture[k] = np.arange(first_id, first_id + MAX_STATES)
        first_id += MAX_STATES
        trans[k] = _PAUSE_TRANS if name == PAUSE_UNIT else _PHONE_TRANS
        entry[k] = _PLAIN_ENTRY
    pause = u - 2
    gap = u - 1
    n_states[gap] = 1
    state_mixture[gap, 0] = state_mixture[pause, 1]  # tied to the middle pause state
    trans[gap] = _GAP_TRANS
    entry[gap] = _GAP_ENTRY
    return UnitSet(tuple(names), n_states, state_mixture, trans, entry)
