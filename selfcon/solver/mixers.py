"""Mixers for the self-consistent loop: they know no physics.

A mixer sees a vector ``x`` (the potential the loop used) and the residual
``r = g(x) - x`` (what one Schrödinger + Poisson pass proposes, minus ``x``),
and returns the next ``x``.  The loop never knows which mixer it has; it only
asks one thing of it, :attr:`Mixer.predictor`, which says whether the Poisson
pass should already contain the carriers' response to the potential change
(the predictor–corrector coupling of Trellakis et al., J. Appl. Phys. 81, 7880
(1997)) or hold the quantum density frozen (classic mixing).

How to add a mixer
------------------
1. Subclass :class:`Mixer`; set ``name`` (the deck's ``solver.method`` value)
   and ``predictor`` (True if it expects the predictor Poisson pass).
2. Take every option as a keyword in ``__init__``; keep defaults safe for a
   4 K modulation-doped heterojunction.
3. Implement ``update(x, r) -> x_next``.  Do not modify ``x`` or ``r``;
   keep whatever history you need on ``self``.
4. Implement ``reset()`` (called before the first iteration of every solve, so an
   instance passed as ``solve(method=...)`` can be reused) and optionally
   ``damp()`` (called when the residual grew: become more cautious; return False
   if there is nothing left to damp).
5. Register it with ``@register`` (then the deck's ``solver.method`` accepts its
   name; ``selfcon.solve(deck, method=MyMixer)`` or ``method=MyMixer(...)`` works
   without registering) and add it to the parametrised tests in
   tests/test_mixing.py (toy linear problem vs numpy.linalg.solve) and
   tests/test_scf.py (same answer on the example decks).
"""
from __future__ import annotations

import numpy as np

_REGISTRY: dict[str, type] = {}


def register(cls: type[Mixer]) -> type[Mixer]:
    """Class decorator: make a :class:`Mixer` subclass available as ``solver.method = cls.name``.

    Exported as :func:`selfcon.register_mixer`.  After registration the deck key
    ``solver.method``, ``--set solver.method=NAME`` and ``solve(deck, method="NAME")``
    accept the name, and the parametrised mixer tests pick the class up.  An unregistered
    class works too, passed as ``solve(deck, method=TheClass)``.

    Parameters
    ----------
    cls : type
        A :class:`Mixer` subclass with a unique ``name``.

    Returns
    -------
    type
        ``cls`` itself, so this is usable as a decorator.

    Examples
    --------
    A registered name is what a deck may write as ``solver.method``:

    >>> import selfcon
    >>> from selfcon.solver.mixers import available_methods
    >>> "anderson" in available_methods()
    True
    >>> @selfcon.register_mixer                      # doctest: +SKIP
    ... class HalfStep(selfcon.Mixer):
    ...     name = "half-step"
    ...     predictor = True
    ...     def update(self, x, r):
    ...         return x + 0.5 * r
    >>> selfcon.solve("inputs/hemt_4K.toml", method="half-step").converged   # doctest: +SKIP
    True
    """
    from selfcon.input.deck import register_method_name
    _REGISTRY[cls.name] = cls
    register_method_name(cls.name)
    return cls


def available_methods() -> tuple[str, ...]:
    return tuple(_REGISTRY)


def make_mixer(method, spec=None) -> "Mixer":
    """The mixer a solve uses: ``method`` is a registered name, a :class:`Mixer` subclass
    or a :class:`Mixer` instance.

    A name or a class is instantiated with the options of the deck's ``[solver]`` table
    ``spec`` that the class declares in ``option_names`` and the deck sets; an instance is
    used as it is (the loop calls its ``reset()`` before the first iteration).
    """
    if isinstance(method, Mixer):
        return method
    if isinstance(method, type) and issubclass(method, Mixer):
        cls = method
    elif isinstance(method, str):
        if method not in _REGISTRY:
            return get_mixer(method)          # raises, naming the registered methods
        cls = _REGISTRY[method]
    else:
        raise TypeError(f"method must be a registered name ({', '.join(_REGISTRY)}), a Mixer "
                        f"subclass or a Mixer instance, not {method!r}")
    opts = {}
    for name in cls.option_names:
        val = getattr(spec, name, None)
        if val is not None:
            opts[name] = val
    return cls(**opts)


def get_mixer(name: str, **options) -> "Mixer":
    """Instantiate the mixer registered under ``name``; unknown options are rejected by name."""
    try:
        cls = _REGISTRY[name]
    except KeyError:
        raise ValueError(f"unknown solver method {name!r} (allowed: {', '.join(_REGISTRY)})") from None
    options = {k: v for k, v in options.items() if v is not None}
    allowed = cls.option_names
    bad = sorted(set(options) - set(allowed))
    if bad:
        raise ValueError(f"solver method {name!r} does not take option(s) {', '.join(bad)} "
                         f"(allowed: {', '.join(allowed) or 'none'})")
    return cls(**options)


class Mixer:
    """Base class of the mixers: propose the next potential from the last one and its residual.

    A mixer knows no physics.  ``update(x, r)`` gets the potential ``x`` the loop used and
    ``r = g(x) - x`` (what one Schrödinger + Poisson pass proposes, minus ``x``) and returns
    the next potential; ``reset()`` is called before every solve, ``damp()`` when the
    residual grew (return False when nothing is left to damp).  Class attributes: ``name``
    (the deck's ``solver.method``), ``predictor`` (True: the Poisson pass lets the subbands
    follow the potential, the predictor-corrector coupling) and ``option_names`` (the
    ``[solver]`` options passed to ``__init__``).  The module docstring has the recipe.

    Examples
    --------
    A fixed half step with the predictor pass, used without registering it:

    >>> import selfcon
    >>> class HalfStep(selfcon.Mixer):
    ...     name = "half-step"
    ...     predictor = True
    ...     def update(self, x, r):
    ...         return x + 0.5 * r
    >>> result = selfcon.solve("inputs/hemt_4K.toml", method=HalfStep)
    >>> result.converged
    True
    >>> reference = selfcon.solve("inputs/hemt_4K.toml")    # the default predictor-corrector
    >>> n1, n2 = (r.summary["electron_sheet_density_cm2"] for r in (result, reference))
    >>> bool(abs(n1 / n2 - 1) < 1e-4)                         # the same answer
    True
    """

    name = "base"
    predictor = False
    option_names: tuple[str, ...] = ()

    def update(self, x: np.ndarray, r: np.ndarray) -> np.ndarray:  # pragma: no cover - abstract
        raise NotImplementedError

    def reset(self) -> None:
        pass

    def damp(self) -> bool:
        return False

    @property
    def factor(self) -> float:
        return getattr(self, "_factor", 1.0)


class _Damped(Mixer):
    """x_next = x + a r with a factor a that damp() halves down to ``smallest``."""

    option_names = ("mixing",)
    default_mixing = 1.0
    smallest = 1e-4

    def __init__(self, mixing: float | None = None):
        self._factor0 = float(self.default_mixing if mixing is None else mixing)
        self._factor = self._factor0

    def update(self, x, r):
        return x + self._factor * r

    def reset(self):
        self._factor = self._factor0

    def damp(self):
        if self._factor <= self.smallest:
            return False
        self._factor *= 0.5
        return True


@register
class PredictorCorrector(_Damped):
    """Take the predictor–corrector Poisson pass as it comes, damped only when the residual grows.

    Because the Poisson pass already contains the linearised carrier response,
    the plain step ``x + r`` is the right one; ``mixing`` (default 1) is the
    starting factor and ``damp()`` halves it down to 1/64.  ``history`` > 0
    extrapolates the steps as :class:`Anderson` does (:func:`anderson_step`, over the
    last ``history`` steps; ``damp()`` forgets them): for a mode the predictor's
    response leaves out, which the plain step damps only slowly.  Unset, the loop
    chooses it per solve (:meth:`suggest_history`; selfcon.solver.loop.ACCELERATED_HISTORY
    for the multiband holes, else 0).
    """

    name = "predictor-corrector"
    predictor = True
    default_mixing = 1.0
    smallest = 1.0 / 64

    def __init__(self, mixing: float | None = None, history: int | None = None):
        super().__init__(mixing)
        self._history0 = None if history is None else int(history)
        self.history = self._history0 or 0
        self._xs: list[np.ndarray] = []
        self._rs: list[np.ndarray] = []

    def suggest_history(self, depth: int) -> None:
        """The loop's depth of the extrapolation for the coming solve (``history``: the
        number of earlier steps :func:`anderson_step` combines; 0 the plain step); a
        ``history`` given to the constructor wins."""
        self.history = int(depth) if self._history0 is None else self._history0

    def reset(self):
        super().reset()
        self._xs, self._rs = [], []

    def damp(self):
        self._xs.clear()
        self._rs.clear()
        return super().damp()

    def update(self, x, r):
        if self.history <= 0:
            return x + self._factor * r
        return anderson_step(self._xs, self._rs, x, r, self._factor, self.history)

    def relax(self):
        """Grow the factor back towards its start after a run of good steps."""
        self._factor = min(self._factor0, 2.0 * self._factor)


@register
class Linear(_Damped):
    """Simple mixing x_next = x + a r (a = ``mixing``, default 0.05)."""

    name = "linear"
    predictor = False
    default_mixing = 0.05


@register
class Anderson(Mixer):
    """Anderson (Pulay) mixing over the last ``history`` iterates.

    With residual differences dR_j = r_j - r_{j-1} and iterate differences
    dX_j = x_j - x_{j-1}, solve min |r - dR g| in least squares and step
    x_next = x + a r - (dX + a dR) g  (Anderson, J. ACM 12, 547 (1965);
    the same extrapolation as Pulay's DIIS).  On a linear fixed-point problem it
    converges like GMRES, in at most n+1 steps.
    """

    name = "anderson"
    predictor = False
    option_names = ("mixing", "history")

    def __init__(self, mixing: float = 0.1, history: int = 6):
        self._factor0 = float(mixing)
        self._factor = float(mixing)
        self.history = int(history)
        self.reset()

    def reset(self):
        self._factor = self._factor0
        self._xs: list[np.ndarray] = []
        self._rs: list[np.ndarray] = []

    def damp(self):
        self._xs.clear()
        self._rs.clear()
        if self._factor <= 1e-4:
            return False
        self._factor *= 0.5
        return True

    def update(self, x, r):
        return anderson_step(self._xs, self._rs, x, r, self._factor, self.history)


def anderson_step(xs: list, rs: list, x, r, a: float, history: int) -> np.ndarray:
    """One step of Anderson's extrapolation (:class:`Anderson`): appends ``x`` and ``r`` to
    the lists ``xs``, ``rs`` (kept to ``history`` + 1 entries) and returns
    x + a r - (dX + a dR) g, g the least-squares fit of r by the residual differences."""
    x = np.asarray(x, dtype=float)
    r = np.asarray(r, dtype=float)
    xs.append(x.copy())
    rs.append(r.copy())
    if len(xs) > history + 1:
        xs.pop(0)
        rs.pop(0)
    if len(xs) == 1:
        return x + a * r
    dX = np.stack([xs[j] - xs[j - 1] for j in range(1, len(xs))], axis=1)
    dR = np.stack([rs[j] - rs[j - 1] for j in range(1, len(rs))], axis=1)
    # scale columns for conditioning, then least squares
    norms = np.linalg.norm(dR, axis=0)
    norms[norms == 0] = 1.0
    g, *_ = np.linalg.lstsq(dR / norms, r, rcond=1e-12)
    g = g / norms
    return x + a * r - (dX + a * dR) @ g
