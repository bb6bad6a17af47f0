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
code, an exception (any ``BaseException``: ``sys.exit`` and a ``KeyboardInterrupt`` the code
raises itself included) or a time-out becomes a :class:`Finding` that says what and where, never
a crash of the tool and never its exit code. Each call runs in a :class:`_Guard`: what it writes
on stdout and stderr is captured (counted in :class:`Output`, never mixed with the verifier's
own output), the working directory is put back, and a real Ctrl-C (SIGINT to the process) still
stops the run.
"""

from __future__ import annotations

import hashlib
import importlib
import inspect
import io
import math
import os
import signal
import sys
import tempfile
import threading

try:                    # signal's own functions without the enum conversions (a call is ~20 us)
    import _signal as _sig
except ImportError:     # pragma: no cover - not CPython
    _sig = signal
from decimal import Decimal
from fractions import Fraction
from pathlib import Path

import attrs

from verifier.errors import UsageError, suggest
from verifier.lang.scope import Scope
from verifier.lang.vocab import Direction
from verifier.world.sim import World

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
    output: object = attrs.field(default=None, eq=False, repr=False)   # Output of its import, or None


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
    output = Output()
    guard = _Guard(None, output)
    try:
        with guard:       # the module's own code runs here: its prints, exits and chdir stay inside
            module = importlib.import_module(mod_name)
            fn = module
            for part in fn_name.split("."):
                fn = getattr(fn, part, None)
                if fn is None:
                    break
            path = getattr(module, "__file__", None)
            path = path if isinstance(path, str) else None
    except KeyboardInterrupt:
        if guard.sigint:
            raise                       # a real Ctrl-C
        raise UsageError(f"cannot import {mod_name!r} for {spec}: it raised KeyboardInterrupt "
                         "itself (no Ctrl-C reached the verifier)") from None
    except SystemExit as exc:
        raise UsageError(f"cannot import {mod_name!r} for {spec}: it called sys.exit"
                         f"({'' if exc.code is None else _show(exc.code)}) while being imported") from None
    except BaseException as exc:  # noqa: BLE001 - any import failure is the user's to see
        raise UsageError(f"cannot import {mod_name!r} for {spec}: {_raised(exc)}") from None
    if fn is None:
        names = [n for n in dir(module) if not n.startswith("_") and callable(getattr(module, n, None))]
        raise UsageError(f"module {mod_name} has no {fn_name!r}" + suggest(fn_name, names))
    if not callable(fn):
        raise UsageError(f"{spec} is not callable")
    return _loaded(spec, fn, path, output)


def _loaded(spec: str, fn, path, output=None) -> Loaded:
    """A Loaded, with its module file shown relative to the working directory and hashed."""
    digest, shown = "", ""
    if path:
        try:
            digest = hashlib.sha256(Path(path).read_bytes()).hexdigest()
        except OSError:     # no such file (code from exec, "<string>"), or unreadable
            digest, path = "", None
    if path:
        try:
            shown = Path(path).resolve().relative_to(Path.cwd().resolve()).as_posix()
        except ValueError:
            shown = Path(path).as_posix()
    return Loaded(spec, fn, shown, digest, output)


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


class Output:
    """What an implementation wrote on stdout and stderr (``print``, ``sys.stdout``, the file
    descriptors 1 and 2 themselves, a subprocess that inherits them), kept out of the verifier's
    own output: bytes in all, the calls that wrote something and the first :data:`KEEP`
    characters."""

    KEEP = 2000

    def __init__(self):
        self.bytes = 0
        self.calls = 0
        self.head = ""

    def add(self, text: str, nbytes: int | None = None) -> None:
        if not text and not nbytes:
            return
        self.bytes += len(text.encode("utf-8", "replace")) if nbytes is None else nbytes
        if len(self.head) < self.KEEP:
            self.head = (self.head + text)[:self.KEEP]

    def merge(self, other) -> None:
        if other is not None and other.bytes:
            self.bytes += other.bytes
            self.calls += other.calls
            self.head = (self.head + other.head)[:self.KEEP]

    def summary(self) -> str:
        """One line for the report ("" when nothing was written)."""
        if not self.bytes:
            return ""
        first = self.head.strip().splitlines()[0][:100] if self.head.strip() else ""
        return (f"the implementation wrote {self.bytes:,} bytes on stdout/stderr in {self.calls:,} "
                f"call{'s' if self.calls != 1 else ''} (captured, not shown)"
                + (f"; it began {first!r}" if first else ""))

    def as_json(self) -> dict:
        return {"bytes": self.bytes, "calls": self.calls, "head": self.head[:200]}


_CAPTURE: list = []     # the temporary file that fd 1 and 2 point at during a call (one a process)


def _capture_fd() -> int:
    if not _CAPTURE:
        _CAPTURE.append(tempfile.TemporaryFile())
    return _CAPTURE[0].fileno()


class _Sink(io.TextIOBase):
    """sys.stdout and sys.stderr during a call: counts what is written, keeps the beginning."""

    def __init__(self, output: Output):
        super().__init__()
        self.output, self.wrote = output, False

    @property
    def encoding(self):
        return "utf-8"

    def write(self, text) -> int:
        text = text if type(text) is str else _show(text)
        self.wrote = self.wrote or bool(text)
        self.output.add(text)
        return len(text)

    def writable(self) -> bool:
        return True

    def isatty(self) -> bool:
        return False

    @property
    def buffer(self):
        """``sys.stdout.buffer``: bytes, counted the same way."""
        return _BinarySink(self)


class _BinarySink(io.RawIOBase):
    def __init__(self, text: _Sink):
        super().__init__()
        self.text = text

    def writable(self) -> bool:
        return True

    def write(self, data) -> int:
        data = bytes(data)
        self.text.wrote = self.text.wrote or bool(data)
        self.text.output.add(data.decode("utf-8", "replace"), len(data))
        return len(data)


class _Guard:
    """Around one call of user code: a time limit (SIGALRM, main thread of a Unix process), a
    SIGINT handler that notes a real Ctrl-C (``sigint``; a ``KeyboardInterrupt`` without one
    was raised by the code itself), stdout and stderr captured into ``output`` (Python's
    streams and the file descriptors), and afterwards the streams, the signal handlers and the
    working directory as they were."""

    def __init__(self, timeout: float | None, output: Output | None):
        self.timeout, self.output = timeout, output
        self.sigint = False
        self._armed = False

    def __enter__(self):
        main = threading.current_thread() is threading.main_thread()
        self._cwd = os.getcwd()
        self._signals = {}
        if main:
            old_int = _sig.getsignal(signal.SIGINT)
            if callable(old_int):   # SIG_IGN and SIG_DFL: no KeyboardInterrupt comes of a SIGINT
                def on_sigint(signum, frame, old=old_int):
                    self.sigint = True
                    old(signum, frame)
                self._signals[signal.SIGINT] = old_int
                _sig.signal(signal.SIGINT, on_sigint)
            if self.timeout and hasattr(signal, "setitimer"):
                def alarm(signum, frame):
                    if self._armed:
                        # again soon, in case this one lands where it is swallowed (a gc
                        # callback, the code's own ``except BaseException``)
                        signal.setitimer(signal.ITIMER_REAL, 0.1)
                        raise _TimeUp()
                self._signals[signal.SIGALRM] = _sig.signal(signal.SIGALRM, alarm)
        self._streams = (sys.stdout, sys.stderr)
        self._fds = None
        if self.output is not None:
            for stream in self._streams:
                try:
                    stream.flush()
                except Exception:  # noqa: BLE001 - a stream that cannot flush has nothing to lose
                    pass
            try:
                saved = (os.dup(1), os.dup(2))
            except OSError:        # no fd 1 or 2 (closed): nothing can reach them anyway
                pass
            else:
                tmp = _capture_fd()      # empty: emptied after each call that wrote to it
                os.dup2(tmp, 1)
                os.dup2(tmp, 2)
                self._fds = saved
            self._sink = _Sink(self.output)
            sys.stdout = sys.stderr = self._sink
        if signal.SIGALRM in self._signals:
            self._armed = True
            signal.setitimer(signal.ITIMER_REAL, self.timeout)
        return self

    def __exit__(self, *exc) -> bool:
        self._armed = False
        if signal.SIGALRM in self._signals:
            signal.setitimer(signal.ITIMER_REAL, 0)
        if self.output is not None:
            wrote = self._sink.wrote
            for stream in (sys.__stdout__, sys.__stderr__):   # written to directly, still buffered
                try:
                    if stream is not None:
                        stream.flush()
                except Exception:  # noqa: BLE001
                    pass
            sys.stdout, sys.stderr = self._streams
            if self._fds is not None:
                os.dup2(self._fds[0], 1)
                os.dup2(self._fds[1], 2)
                os.close(self._fds[0])
                os.close(self._fds[1])
                tmp = _capture_fd()
                size = os.fstat(tmp).st_size
                if size:
                    room = max(0, Output.KEEP - len(self.output.head))
                    self.output.add(os.pread(tmp, room, 0).decode("utf-8", "replace") if room else "", size)
                    wrote = True
                    os.ftruncate(tmp, 0)
                    os.lseek(tmp, 0, os.SEEK_SET)
            self.output.calls += wrote
        else:
            sys.stdout, sys.stderr = self._streams
        for sig, old in self._signals.items():
            _sig.signal(sig, old)
        try:
            if os.getcwd() != self._cwd:
                os.chdir(self._cwd)
        except OSError:
            os.chdir(self._cwd)
        return False


_MINE = {__file__, str(Path(__file__).resolve())}


def _where(exc: BaseException, fn) -> str:
    """The innermost frame of the implementation's code in a traceback, as file:line. Walks the
    traceback without resolving or reading any file but the one frame it names (a
    RecursionError has a thousand frames)."""
    tb, last = exc.__traceback__, None
    while tb is not None:
        name = tb.tb_frame.f_code.co_filename
        if name not in _MINE:
            last = (name, tb.tb_lineno)
        tb = tb.tb_next
    if last is None:
        try:
            return f"{inspect.getsourcefile(fn)}:{inspect.getsourcelines(fn)[1]}"
        except (TypeError, OSError):
            return ""
    name, line = last
    try:
        name = Path(name).resolve().relative_to(Path.cwd().resolve()).as_posix()
    except (ValueError, OSError):
        pass
    return f"{name}:{line}"


def _show(x, limit: int = 80, typed: bool = False) -> str:
    """A returned value in a message, whatever it is: a very long whole number by its count of
    digits, anything whose repr fails by its type, the rest by its repr cut at ``limit``
    (after its type's name when ``typed``)."""
    name = type(x).__name__
    if isinstance(x, int) and not isinstance(x, bool):
        v = int.__int__(x)
        if v.bit_length() > 200:
            digits = int((v.bit_length() - 1) * math.log10(2)) + 1
            digits += abs(v) >= 10 ** digits
            return f"a whole number of {digits:,} digits"
        text = repr(v)
    else:
        try:
            text = repr(x)
            if type(text) is not str:
                raise TypeError("__repr__ returned no str")
        except BaseException as exc:  # noqa: BLE001 - the value's own code failed
            return f"a {name} whose repr raised {type(exc).__name__}"
    text = text if len(text) <= limit else text[:limit] + "..."
    return f"{name} {text}" if typed or (type(x) is not int and isinstance(x, int)) else text


def _raised(exc: BaseException) -> str:
    """What an exception says, safely (its __str__ is the user's code too), cut short."""
    name = type(exc).__name__
    if isinstance(exc, SystemExit):
        code = exc.code
        shown = "" if code is None else (_show(code) if not isinstance(code, str) else _show(code, 200))
        return f"SystemExit (sys.exit({shown})): an implementation must return, not exit"
    if isinstance(exc, KeyboardInterrupt):
        return "KeyboardInterrupt, raised by the code itself (no Ctrl-C reached the verifier)"
    try:
        text = str(exc)
        if type(text) is not str:
            raise TypeError("__str__ returned no str")
    except BaseException as inner:  # noqa: BLE001
        text = f"(its message could not be read: {type(inner).__name__})"
    text = text if len(text) <= 300 else text[:300] + "..."
    return f"{name}: {text}" if text else name


LENGTH_DIGITS = 1000    # digits a returned length's numerator or denominator may have


def _code(v, name: str, who: str) -> int:
    """A returned packet code as a plain int (an int subclass, an IntEnum say, by its value:
    none of its own methods is called), in its range."""
    if isinstance(v, bool) or not isinstance(v, int):
        raise _Bad("wrong type", f"{who} field {name!r} must be a whole number (a packet code), "
                                 f"got {_show(v, typed=True)}")
    v = int.__int__(v)
    lo, hi = CODE_RANGE[name]
    if not lo <= v <= hi:
        raise _Bad("out of range", f"{who} field {name!r} is {_show(v)}, outside the code range {lo}..{hi}")
    return v


def _exact(x, name: str, who: str):
    """A returned length as an exact Fraction (int, Fraction, Decimal or float; a subclass of
    int or float by its value), at most :data:`LENGTH_DIGITS` digits above and below the line."""
    if isinstance(x, bool):
        raise _Bad("wrong type", f"{who} field {name!r} must be a length in metres, got {x!r}")
    if isinstance(x, int):
        v = F(int.__int__(x))
    elif isinstance(x, float):
        x = float.__float__(x)
        if x != x or x in (float("inf"), float("-inf")):
            raise _Bad("out of range", f"{who} field {name!r} is {x!r}")
        v = F(str(x))
    elif isinstance(x, Decimal):
        if Decimal.is_nan(x) or Decimal.is_infinite(x):
            raise _Bad("out of range", f"{who} field {name!r} is {_show(x)}")
        if abs(Decimal.as_tuple(x).exponent) > LENGTH_DIGITS:
            raise _Bad("out of range", f"{who} field {name!r} is {_show(x)}: more than "
                                       f"{LENGTH_DIGITS:,} digits")
        v = F(x)
    elif isinstance(x, Fraction):
        v = F(x)
    else:
        raise _Bad("wrong type", f"{who} field {name!r} must be a length in metres (a number), "
                                 f"got {_show(x, typed=True)}")
    if max(v.numerator.bit_length(), v.denominator.bit_length()) > LENGTH_DIGITS * 3.33:
        raise _Bad("out of range", f"{who} field {name!r} is a length of more than {LENGTH_DIGITS:,} "
                                   "digits (numerator or denominator)")
    return v


class _Bad(Exception):
    def __init__(self, kind: str, message: str):
        super().__init__(message)
        self.kind, self.message = kind, message


def _fields(out, cls, who: str) -> dict:
    """The returned fields by plain str name. A dict (or a subclass) is read with dict's own
    methods, its keys by their str value, so that nothing of the returned object's own code
    runs here (its repr only in a message, guarded)."""
    if isinstance(out, cls):
        return attrs.asdict(out, recurse=False)
    if isinstance(out, dict):
        allowed = set(attrs.fields_dict(cls))
        d, unknown = {}, []
        for k, v in dict.items(out):
            if isinstance(k, str):
                k = str.__str__(k)
                if k in allowed:
                    d[k] = v
                    continue
            unknown.append(k)
        if unknown:
            first = min(unknown, key=lambda k: (not isinstance(k, str), k if isinstance(k, str) else ""))
            if isinstance(first, str):
                return_msg = f"{who} returned an unknown field {_show(first)}" + suggest(first, allowed)
            else:
                return_msg = (f"{who} returned a key that is not a field name: "
                              f"{_show(first, typed=True)}")
            raise _Bad("unknown field", return_msg)
        return d
    raise _Bad("wrong type", f"{who} must return a {cls.__name__} or a dict, got "
                             f"{_show(out, typed=True)}")


def validate_report(out, who: str = "the onboard implementation") -> Report:
    d = _fields(out, Report, who)
    codes = {}
    for name in REPORT_CODES:
        if d.get(name) is None:
            raise _Bad("missing field", f"{who} returned no {name!r}")
        codes[name] = _code(d[name], name, who)
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
        if d.get(name) is None:
            raise _Bad("missing field", f"{who} returned no {name!r}")
        vals[name] = _exact(d[name], name, who)
    return Placement(**vals)


def call_checked(loaded: Loaded, arg, validate, timeout: float | None = DEFAULT_CALL_TIMEOUT,
                 output: Output | None = None):
    """Call an implementation and validate what it returns: (value, None) or (None, Finding).
    Both run inside a :class:`_Guard` (the time limit counts the validation too: a returned
    value's own methods are the user's code). Any exception is a finding, but a
    ``KeyboardInterrupt`` that follows a real SIGINT, which stops the run."""
    who = f"{loaded.spec}"
    stage = ["call"]
    guard = _Guard(timeout, output if output is not None else Output())
    try:
        with guard:
            out = loaded.fn(arg)
            stage[0] = "validate"
            value = validate(out, who)
    except _TimeUp:
        return None, Finding("time-out", f"{who} did not return within {timeout:g} s")
    except _Bad as bad:
        return None, Finding(bad.kind, bad.message)
    except KeyboardInterrupt as exc:
        if guard.sigint:
            raise
        return None, Finding("exception", f"{who} raised {_raised(exc)}", _where(exc, loaded.fn))
    except BaseException as exc:  # noqa: BLE001 - the implementation's failure is a finding
        if stage[0] == "call":
            return None, Finding("exception", f"{who} raised {_raised(exc)}", _where(exc, loaded.fn))
        return None, Finding("wrong type", f"{who} returned a value that cannot be read: reading it "
                             f"raised {_raised(exc)}", _where(exc, loaded.fn))
    if guard.sigint:           # a Ctrl-C the implementation swallowed still stops the run
        raise KeyboardInterrupt
    return value, None


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
