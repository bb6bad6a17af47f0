"""The implementation interface (docs/implementations.md): what a user's onboard or trackside
code receives and must return when a rule pack is used as its test oracle.

An **onboard implementation** is a callable ``report(obs: Observation) -> Report | dict``. It
receives only what the onboard equipment can observe in one world (never the hidden truth: no
real distances, no location or detection errors, no real direction except as the reading order
of the balises or linking shows it) and returns the position report as packet codes
(DESIGN 4.4), optionally with the unrounded lengths. A **trackside implementation** is a
callable ``place(packet: Packet) -> Placement | dict | None`` that receives the packet codes and
the train data and returns where it places the train (``None``: not placed).

Everything returned is validated; a wrong type, a missing or unknown field, an out-of-range
code, an exception or a time-out becomes a :class:`Finding` that says what and where, never a
crash of the tool.
"""

from __future__ import annotations

import hashlib
import importlib
import inspect
import signal
import sys
import threading
import traceback
from decimal import Decimal
from fractions import Fraction
from pathlib import Path

import attrs

from verifier.errors import UsageError
from verifier.world.scope import Scope
from verifier.world.sim import World
from verifier.world.vocab import Direction

F = Fraction
DEFAULT_CALL_TIMEOUT = 5.0      # seconds per call of an implementation


@attrs.frozen
class LegObservation:
    """One movement leg as the onboard sees it."""

    cab_change: bool          # the active cab changed (at standstill) before this leg
    running: str              # "forward" or "backward", relative to the active cab
    odometer: Fraction        # distance measured by the odometer in this leg, metres


@attrs.frozen
class Observation:
    """What the onboard can observe in one world (DESIGN 4.1, 4.3): the group's telegrams and
    linking, the train data, the running direction over the group and each leg's cab change,
    running direction and odometer reading. Lengths are exact ``Fraction`` metres."""

    balises: int              # balises in the group, from the telegrams (N_TOTAL + 1)
    readings: tuple           # N_PIG of each balise read, in the order the antenna passed them
    linked: bool              # linking announced this group and its direction of passage
    linked_direction: str | None   # the announced direction of passage: "nominal"/"reverse"; None if not linked
    locacc: Fraction          # Q_LOCACC of the group (from linking or the national value)
    train_length: Fraction    # train data
    antenna: Fraction         # from the active front end back to the balise antenna
    running: str              # over the group: "forward" (front first) or "backward"
    odometry_over: tuple      # the over-reading bound (fixed metres, rate): SUBSET-041 5.3.1.1, with the
                              # detection error in the fixed part unless [world] detection_in_odometry
    odometry_under: tuple     # the under-reading bound (fixed metres, rate), likewise
    legs: tuple               # LegObservation, in order


@attrs.frozen
class Report:
    """The position report as the onboard sends it: packet codes (SUBSET-026 7.5.1.104-106,
    7.5.1.13/43/44, 7.5.1.129), and optionally the unrounded lengths in metres."""

    q_scale: int              # 0 = 10 cm, 1 = 1 m, 2 = 10 m
    d_lrbg: int               # 0..32766, 32767 = unknown
    q_dlrbg: int              # 0 reverse side, 1 nominal side, 2 unknown
    q_dirlrbg: int
    q_dirtrain: int
    l_doubtover: int
    l_doubtunder: int
    d_lrbg_m: Fraction | None = None        # unrounded D_LRBG (rules reading est.d_lrbg need it)
    l_doubtover_m: Fraction | None = None   # unrounded L_DOUBTOVER (est.l_doubtover)
    l_doubtunder_m: Fraction | None = None  # unrounded L_DOUBTUNDER (est.l_doubtunder)


@attrs.frozen
class Packet:
    """What a trackside implementation receives: the codes of the report and the train data
    the trackside knows (DESIGN 5, observability of [trackside])."""

    q_scale: int
    d_lrbg: int
    q_dlrbg: int
    q_dirlrbg: int
    q_dirtrain: int
    l_doubtover: int
    l_doubtunder: int
    train_length: Fraction
    locacc: Fraction


@attrs.frozen
class Placement:
    """Where the trackside places the train, in the LRBG frame (metres, nominal positive)."""

    est_front: Fraction
    max_safe_front: Fraction
    min_safe_front: Fraction
    min_safe_rear: Fraction


REPORT_CODES = ("q_scale", "d_lrbg", "q_dlrbg", "q_dirlrbg", "q_dirtrain", "l_doubtover", "l_doubtunder")
REPORT_LENGTHS = ("d_lrbg_m", "l_doubtover_m", "l_doubtunder_m")
PLACEMENT_LENGTHS = ("est_front", "max_safe_front", "min_safe_front", "min_safe_rear")
CODE_RANGE = {"q_scale": (0, 2), "q_dlrbg": (0, 2), "q_dirlrbg": (0, 2), "q_dirtrain": (0, 2),
              "d_lrbg": (0, 32767), "l_doubtover": (0, 32767), "l_doubtunder": (0, 32767)}


@attrs.frozen
class Finding:
    """An implementation broke the interface in one world: what happened and where."""

    kind: str                 # exception, time-out, wrong type, missing field, unknown field, out of range
    message: str
    where: str = ""           # file:line of the implementation's frame, for an exception


def readings_of(world: World) -> tuple:
    """The N_PIG numbers of the balises read, in the order of passage. The model says how many
    were read (``lrbg.read``, the reference balise N_PIG 0 among them); this interface takes
    the first ``read`` balises of the group counted from the reference balise."""
    order = list(range(world.read))
    return tuple(order if world.direction is Direction.NOMINAL else reversed(order))


def observe(world: World, scope: Scope) -> Observation:
    """The observable part of a world (DESIGN 4.3: nothing that carries the hidden truth
    beyond what the readings or linking show)."""
    return Observation(
        balises=world.balises, readings=readings_of(world), linked=world.linked,
        linked_direction=world.direction.word if world.linked else None, locacc=world.locacc,
        train_length=world.length, antenna=world.antenna, running=world.running.word,
        odometry_over=(scope.odometry_over.fixed + _on_top(scope), scope.odometry_over.rate),
        odometry_under=(scope.odometry_under.fixed + _on_top(scope), scope.odometry_under.rate),
        legs=tuple(LegObservation(leg.cab_change, leg.running.word, leg.odometer) for leg in world.legs))


# ---- loading a callable ------------------------------------------------------------------------

@attrs.frozen
class Loaded:
    """An implementation callable with what identifies it in evidence files."""

    spec: str                 # "module:function" as given
    fn: object = attrs.field(eq=False, repr=False)
    module_file: str          # the module's file, as a path relative to the working directory when below it
    module_sha256: str        # sha256 of that file's bytes ("" when it has no file)


def load(spec: str, search: tuple = ()) -> Loaded:
    """``module:function`` (``module`` importable, after putting each of ``search`` on the path).
    Raises UsageError with what is wrong."""
    if not isinstance(spec, str) or spec.count(":") != 1 or not all(spec.split(":")):
        raise UsageError(f"an implementation is named as module:function, got {spec!r}")
    mod_name, fn_name = spec.split(":")
    for p in search:
        p = str(Path(p).resolve())
        if p not in sys.path:
            sys.path.insert(0, p)
    if str(Path.cwd()) not in sys.path and "" not in sys.path:
        sys.path.insert(0, str(Path.cwd()))
    try:
        module = importlib.import_module(mod_name)
    except Exception as exc:   # noqa: BLE001 - any import failure is the user's to see
        raise UsageError(f"cannot import {mod_name!r} for {spec}: {type(exc).__name__}: {exc}") from None
    fn = module
    for part in fn_name.split("."):
        fn = getattr(fn, part, None)
        if fn is None:
            names = [n for n in dir(module) if not n.startswith("_") and callable(getattr(module, n))]
            from verifier.errors import suggest
            raise UsageError(f"module {mod_name} has no {fn_name!r}" + suggest(fn_name, names))
    if not callable(fn):
        raise UsageError(f"{spec} is not callable")
    return _loaded(spec, fn, getattr(module, "__file__", None))


def _loaded(spec: str, fn, path) -> Loaded:
    """A Loaded, with its module file shown relative to the working directory and hashed."""
    digest, shown = "", ""
    if path:
        digest = hashlib.sha256(Path(path).read_bytes()).hexdigest()
        try:
            shown = Path(path).resolve().relative_to(Path.cwd().resolve()).as_posix()
        except ValueError:
            shown = Path(path).as_posix()
    return Loaded(spec, fn, shown, digest)


def wrap(fn) -> Loaded:
    """A callable given directly (the pytest fixture), named by its module and qualified name."""
    if isinstance(fn, Loaded):
        return fn
    if not callable(fn):
        raise UsageError(f"an implementation must be callable, got {fn!r}")
    spec = f"{getattr(fn, '__module__', '?')}:{getattr(fn, '__qualname__', getattr(fn, '__name__', '?'))}"
    try:
        path = inspect.getsourcefile(fn)
    except TypeError:
        path = None
    return _loaded(spec, fn, path)


# ---- calling, with a time limit and validation ---------------------------------------------------

class _TimeUp(BaseException):
    """Raised in the implementation when its time is up (not an Exception: it must pass
    through the implementation's own ``except Exception``)."""


def _call(fn, arg, timeout: float | None):
    """fn(arg), interrupted after ``timeout`` seconds where a timer signal can do it (the main
    thread of a Unix process); elsewhere without a limit."""
    usable = (timeout and hasattr(signal, "setitimer")
              and threading.current_thread() is threading.main_thread())
    if not usable:
        return fn(arg)

    def alarm(signum, frame):
        raise _TimeUp()

    old = signal.signal(signal.SIGALRM, alarm)
    signal.setitimer(signal.ITIMER_REAL, timeout)
    try:
        return fn(arg)
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)


def _where(exc: BaseException, fn) -> str:
    """The innermost frame of the implementation's code in a traceback, as file:line."""
    frames = traceback.extract_tb(exc.__traceback__)
    mine = Path(__file__).resolve()
    frames = [f for f in frames if Path(f.filename).resolve() != mine]
    if not frames:
        try:
            return f"{inspect.getsourcefile(fn)}:{inspect.getsourcelines(fn)[1]}"
        except (TypeError, OSError):
            return ""
    f = frames[-1]
    try:
        name = Path(f.filename).resolve().relative_to(Path.cwd().resolve()).as_posix()
    except ValueError:
        name = f.filename
    return f"{name}:{f.lineno}"


def _exact(x, name: str, who: str):
    """A returned length as an exact Fraction (int, Fraction, Decimal, float or numeric text)."""
    if isinstance(x, bool):
        raise _Bad("wrong type", f"{who} field {name!r} must be a length in metres, got {x!r}")
    if isinstance(x, (int, Fraction)):
        return F(x)
    if isinstance(x, (float, Decimal)):
        if x != x or x in (float("inf"), float("-inf")):
            raise _Bad("out of range", f"{who} field {name!r} is {x!r}")
        return F(str(x)) if isinstance(x, float) else F(x)
    raise _Bad("wrong type", f"{who} field {name!r} must be a length in metres (a number), "
                             f"got {type(x).__name__} {x!r}")


class _Bad(Exception):
    def __init__(self, kind: str, message: str):
        super().__init__(message)
        self.kind, self.message = kind, message


def _fields(out, cls, who: str) -> dict:
    if isinstance(out, cls):
        return attrs.asdict(out, recurse=False)
    if isinstance(out, dict):
        allowed = set(attrs.fields_dict(cls))
        unknown = sorted(str(k) for k in out if k not in allowed)
        if unknown:
            from verifier.errors import suggest
            raise _Bad("unknown field", f"{who} returned an unknown field {unknown[0]!r}"
                       + suggest(unknown[0], allowed))
        return dict(out)
    raise _Bad("wrong type", f"{who} must return a {cls.__name__} or a dict, got "
                             f"{type(out).__name__} {out!r:.80}")


def validate_report(out, who: str = "the onboard implementation") -> Report:
    d = _fields(out, Report, who)
    codes = {}
    for name in REPORT_CODES:
        if name not in d or d[name] is None:
            raise _Bad("missing field", f"{who} returned no {name!r}")
        v = d[name]
        if isinstance(v, bool) or not isinstance(v, int):
            raise _Bad("wrong type", f"{who} field {name!r} must be a whole number (a packet code), "
                                     f"got {type(v).__name__} {v!r}")
        lo, hi = CODE_RANGE[name]
        if not lo <= v <= hi:
            raise _Bad("out of range", f"{who} field {name!r} is {v}, outside the code range {lo}..{hi}")
        codes[name] = v
    lengths = {}
    for name in REPORT_LENGTHS:
        v = d.get(name)
        lengths[name] = None if v is None else _exact(v, name, who)
    return Report(**codes, **lengths)


def validate_placement(out, who: str = "the trackside implementation") -> Placement | None:
    if out is None:
        return None
    d = _fields(out, Placement, who)
    vals = {}
    for name in PLACEMENT_LENGTHS:
        if name not in d or d[name] is None:
            raise _Bad("missing field", f"{who} returned no {name!r}")
        vals[name] = _exact(d[name], name, who)
    return Placement(**vals)


def call_checked(loaded: Loaded, arg, validate, timeout: float | None = DEFAULT_CALL_TIMEOUT):
    """Call an implementation and validate what it returns: (value, None) or (None, Finding)."""
    who = f"{loaded.spec}"
    try:
        out = _call(loaded.fn, arg, timeout)
    except _TimeUp:
        return None, Finding("time-out", f"{who} did not return within {timeout:g} s")
    except Exception as exc:  # noqa: BLE001 - the implementation's failure is a finding
        return None, Finding("exception", f"{who} raised {type(exc).__name__}: {exc}", _where(exc, loaded.fn))
    try:
        return validate(out, who), None
    except _Bad as bad:
        return None, Finding(bad.kind, bad.message)


def packet_of(report: Report, world: World) -> Packet:
    return Packet(report.q_scale, report.d_lrbg, report.q_dlrbg, report.q_dirlrbg,
                  report.q_dirtrain, report.l_doubtover, report.l_doubtunder, world.length,
                  world.locacc)


def direction_of_code(code: int) -> Direction:
    return {0: Direction.REVERSE, 1: Direction.NOMINAL, 2: Direction.UNKNOWN}[code]


def _on_top(scope) -> Fraction:
    """The detection error the onboard adds to the odometry bound (DESIGN 4.1: on top of it
    unless [world] detection_in_odometry = true)."""
    return Fraction(0) if scope.detection_in_odometry else scope.detection
