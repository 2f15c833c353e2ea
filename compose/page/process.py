"""The page outputs (NAME.pdf, NAME.svg, NAME.page.png) written by a process of their own, on the
other core, beside the rest of the render.

Drawing a page is matplotlib work that holds the interpreter lock, so a thread would not run it
beside the map's walk or the review page. :class:`PageJob` forks the render as soon as its
style is loaded, before any other thread starts: the child loads the page writers' modules
while the parent loads its own and prepares the render, then gets the prepared render's
canvas, ramps and layers pickled (:mod:`compose.page.handover`: the style's own objects by
reference, the layers' open sources left behind; nothing is prepared twice). When they cannot
be pickled the render is forked after its preparation instead, the child sharing the prepared
layers copy-on-write. The child starts the page's figure while the parent walks the windows
into the page sink, whose two images live in memory shared by both processes
(:func:`shared_image`). The page depends on the walk only through which layers show no-data on
the map (the legend's no-data entries): the parent hands over a guess of them made from the
sources with the prepared render (:mod:`compose.page.nodata`), from which the child draws the
legend, the furniture, the SVG and most of the PDF at once, while the walk runs; when the walk is
done the parent hands over the true set (a wrong guess: the page is drawn again) and goes on with
its own outputs; the child sends
the page's layout back first (the check judges the furniture with it) and its seconds when all
three files are written to their temporary names. The parent waits for it before the output set
is committed, kills it if the render fails, and re-raises its error (a style error stays a style
error: exit 2).

Where forking is not safe or possible (another thread is running, so a lock could be copied held;
not Linux) the page is written in this process, at the same point and with the same result.
"""
from __future__ import annotations

import gc
import mmap
import os
import pickle
import signal
import time
from collections.abc import Callable
from pathlib import Path
from types import SimpleNamespace
from typing import Any

import numpy as np

from compose.forking import can_fork, die_with_parent, end_child, read_exactly
from compose.timeline import note_process, span

__all__ = ["PageJob", "Forked", "shared_image", "can_fork"]


def shared_image(height: int, width: int, channels: int = 3) -> np.ndarray:
    """A zeroed (height, width, channels) uint8 array in anonymous shared memory: what one
    process writes, a process forked after its creation sees."""
    n = height * width * channels
    buf = mmap.mmap(-1, max(1, n))                   # MAP_SHARED | MAP_ANONYMOUS, zero-filled
    return np.frombuffer(buf, dtype=np.uint8, count=n).reshape(height, width, channels)


def _die_with_parent(parent: int) -> None:
    """End this forked process at once if its parent ended; else it dies with it
    (:func:`compose.forking.die_with_parent`)."""
    if not die_with_parent(parent):
        os._exit(1)


def _send(out, message) -> None:
    pickle.dump(message, out, protocol=pickle.HIGHEST_PROTOCOL)
    out.flush()


def _raise_from(message, reap) -> None:
    """Re-raise the error a forked process sent (or report one that sent nothing)."""
    _, exc, trace = message
    reap()
    if exc is None:
        raise RuntimeError("the page writer process ended without writing the page"
                           + (f":\n{trace}" if trace else ""))
    raise exc


def _send_error(out, exc: BaseException) -> None:
    import traceback

    try:
        _send(out, ("error", exc, traceback.format_exc()))
    except Exception:
        _send(out, ("error", None, traceback.format_exc()))


def _end_child(job, kill: bool) -> None:
    """Close ``job._inbox``, kill ``job.pid`` first when ``kill``, reap it; both set to None
    (a second call does nothing)."""
    if job._inbox is not None:
        job._inbox.close()
        job._inbox = None
    if job.pid is not None:
        end_child(job.pid, kill)
        job.pid = None


class Forked:
    """``fn()`` run in a forked process (from a process with no other thread running);
    :meth:`result` returns what it returned (pickled back) or raises what it raised; :meth:`abort`
    ends it. The forked process dies with this one."""

    def __init__(self, fn: Callable[[], Any]):
        r, w = os.pipe()
        parent = os.getpid()
        pid = os.fork()
        if pid == 0:
            os.close(r)
            status = 0
            try:
                _die_with_parent(parent)
                with os.fdopen(w, "wb") as out:
                    try:
                        _send(out, ("done", fn()))
                    except BaseException as exc:          # noqa: BLE001 - handed over
                        status = 1
                        _send_error(out, exc)
            except BaseException:                         # noqa: BLE001
                status = 1
            finally:
                note_process()
                os._exit(status)
        os.close(w)
        self.pid: int | None = pid
        self._inbox: Any = os.fdopen(r, "rb")

    def result(self) -> Any:
        try:
            message = pickle.load(self._inbox)
        except EOFError:
            message = ("error", None, "")
        if message[0] == "error":
            _raise_from(message, self.abort)
        self.abort()
        return message[1]

    def abort(self) -> None:
        _end_child(self, kill=True)


def _child(inbox: int, outbox: int, parent: int, job: PageJob) -> None:
    """The forked process: load the writers, get the prepared render when it was forked before
    it (:meth:`PageJob.attach`), start the page's figure, wait for the walk, write the page.
    Never returns."""
    status = 0
    try:
        # no cyclic garbage collection: a process that draws one page and ends (os._exit)
        # spent about 0.15 s of CPU in it (collections over the render's objects inherited at
        # the fork and matplotlib's), for memory it returns by ending
        gc.disable()
        signal.signal(signal.SIGINT, signal.SIG_DFL)      # an interrupt ends it quietly; the
        signal.signal(signal.SIGTERM, signal.SIG_DFL)     # parent cleans up the temporaries
        _die_with_parent(parent)
        if job._warm is not None:
            with span("page imports"):
                job._warm()
        with os.fdopen(inbox, "rb") as inp, os.fdopen(outbox, "wb") as out:
            prepared = job._prepared
            if prepared is None:               # forked before the render was prepared
                try:
                    with span("page waits for the prepared render"):
                        message = pickle.load(inp)
                except EOFError:                          # the render ended without a page
                    os._exit(0)
                with span("page unpacks the prepared render"):
                    prepared = _unpacked(job, _handed_over(job, message[1]))
                if len(message) > 2:
                    job._guess = message[2]
            started = None
            if job._ahead is not None:         # while the parent walks the windows
                try:
                    with span("page ahead"):
                        started = job._ahead(prepared)
                except Exception:              # the writer builds it again and reports
                    started = None
            if job._html is not None:          # (the first band of the walk is not done yet)
                try:
                    with span("review page ahead"):
                        part = job._html(prepared)
                except Exception:              # the parent makes it itself
                    part = None
                _send(out, ("html", part))
            early = None
            if job._early is not None:
                def on_guess(guess, layout, png):
                    # read by the parent after the walk, if its no-data layers are the guess
                    _send(out, ("guess", (None if guess is None else frozenset(guess), layout,
                                          png)))

                def early(guess, rest):
                    return job._early(prepared, started, guess, rest, on_guess)
            try:
                with span("page waits for walk"):
                    nodata, drawn = _walked(inp, job._sink, early, job._guess)
            except EOFError:                              # the render ended without a page
                os._exit(0)
            try:
                def on_layout(layout):
                    _send(out, ("layout", layout))

                sent = False
                if drawn is not None and drawn.holds_for(nodata) and drawn.legend_png is not None:
                    _send(out, ("legend", drawn.legend_png))       # drawn during the walk
                    sent = True

                def with_png():
                    # drawn by the process that draws the page PNG (forked from this one
                    # after the layout was sent: it writes to the parent while this one writes
                    # the PDF and SVG and sends nothing until that process is done)
                    if job._legend is not None and not sent:
                        with span("legend png"):
                            _send(out, ("legend", job._legend(prepared, nodata)))

                # alone in its process, the page may fork once more: the page PNG beside the PDF
                kw: dict[str, Any] = {"early": drawn} if drawn is not None else {}
                if started is not None and drawn is None:  # (an early page finished it)
                    kw["ahead"] = started
                seconds, _ = job._write(job._style, prepared, job._sink, job._tmp, nodata,
                                        on_layout=on_layout, fork=True, with_png=with_png, **kw)
                _send(out, ("done", seconds))
            except BaseException as exc:                  # noqa: BLE001 - handed to the parent
                status = 1
                _send_error(out, exc)
    except BaseException:                                 # noqa: BLE001
        status = 1
    finally:
        note_process()
        os._exit(status)        # no atexit, no finalizers: the parent owns every shared resource


def _walked(inp, sink, early: Callable[..., Any] | None = None,
            guess: frozenset[str] | None = None) -> tuple[set[str] | None, Any]:
    """Wait for the walk's end, encoding the page's raster (``sink.base``) band by band as the
    parent finishes it, as the PDF and SVG writers embed it (RGB rows top first,
    :func:`compose.page.encode.remember`; :func:`compose.page.write.write_page` has the PDF
    writer store the rows top first, and the SVG's opaque RGBA is stored as RGB). After the
    first band, ``early(nodata, rest)`` runs once with the no-data layers of the windows walked
    so far (a guess of the final set; :func:`compose.page.write.page_early`); ``rest()`` waits
    for the rest of the walk the same way and returns the final set (``early`` may call it, to
    finish work that needs the whole map). ``guess``: the no-data layers guessed from the
    sources when the render was prepared (:func:`compose.page.nodata.nodata_guess`; None: no
    guess): then ``early(guess, rest)`` runs at once, before the first band. Returns the
    no-data layers the parent sent at the end and what ``early`` returned (None if it failed or
    never ran)."""
    base = getattr(sink, "base", None)
    stream = None
    if base is not None:
        from compose.page.encode import PngRows

        stream = PngRows(base.shape[1], "RGB")
    done = 0
    guessed: Any = None
    walked = False
    early_fn: Callable[..., Any] | None = None
    final: set[str] | None = None

    def encode(upto: int) -> None:
        nonlocal done
        if stream is None or base is None or upto <= done:
            return
        with span("page encodes its raster"):
            stream.add(base[done:upto])
        done = upto
        for follow in list(getattr(sink, "followers", ())):
            follow(upto)

    def step() -> tuple[int, set[str] | None] | None:
        """Handle the next message: the band's (rows, no-data so far), or None at the end."""
        nonlocal walked, final
        kind, value = pickle.load(inp)
        if kind == "rows":
            encode(value[0])
            return value
        if stream is not None and base is not None:
            from compose.page.encode import remember

            encode(base.shape[0])
            remember(*stream.finish(), pixels=base)
        walked, final = True, value
        return None

    def rest() -> set[str] | None:
        with span("page waits for the rest of the walk"):
            while not walked:
                step()
        return final

    def draw_early(nodata) -> Any:
        assert early is not None
        try:
            with span("page drawn early"):
                return early(nodata, rest)
        except Exception:                      # written after the walk as without it
            return None

    if early is not None and guess is not None:
        early_fn = early
        guessed = draw_early(set(guess))
    while not walked:
        got = step()
        if got is not None and early_fn is None and early is not None:
            early_fn = early                    # once, with the no-data layers so far
            guessed = draw_early(got[1])
    return final, guessed


def _guess_of(prepared) -> frozenset[str] | None:
    """The no-data layers of ``prepared`` guessed from its sources, or None
    (:func:`compose.page.nodata.nodata_guess`)."""
    from compose.page.nodata import nodata_guess

    try:
        return nodata_guess(prepared.layers, prepared.canvas)
    except Exception:                                   # noqa: BLE001 - no guess then
        return None


def _handover_file() -> int | None:
    """A file in memory (Linux memfd) for the packed prepared render, created before the fork
    so both processes hold it: the render writes it without waiting for the page process to
    read (a pipe holds 64 kB; the demo's prepared render is about 0.6 MB, and the page process
    reads only once its imports are done). None where there is none: the pipe carries it."""
    try:
        return os.memfd_create("compose-page-handover", getattr(os, "MFD_CLOEXEC", 1))
    except (AttributeError, OSError):                    # pragma: no cover - not Linux
        return None


def _close_handover(job: PageJob) -> None:
    if job._handover is not None:
        try:
            os.close(job._handover)
        except OSError:                                 # pragma: no cover
            pass
        job._handover = None


def _handed_over(job: PageJob, sent) -> bytes:
    """The packed prepared render: ``sent`` itself, or ``("file", n)``: its ``n`` bytes in the
    hand-over file (:func:`_handover_file`), which is closed then."""
    if isinstance(sent, bytes):
        return sent
    _, n = sent
    fd = job._handover
    if fd is None:
        raise EOFError("the prepared render's hand-over file is closed")
    data = read_exactly(fd, n, 0)
    _close_handover(job)
    return data


def _unpacked(job: PageJob, data: bytes) -> SimpleNamespace:
    """The page process's stand-in for the prepared render: what :meth:`PageJob.attach` sent."""
    from compose.page.handover import unpack

    canvas, ramps, layers, blocked = unpack(data, job._shared or {})
    return SimpleNamespace(style=job._style, canvas=canvas, ramps=ramps, layers=layers,
                           blocked=blocked)


class PageJob:
    """Writes the page of one render in a forked process when it can (:func:`can_fork`), else
    in this process: ``write(style, prepared, sink, tmp, nodata_seen, on_layout=None) ->
    (seconds, layout)`` (:func:`compose.page.write.write_page`); ``warm()``: loads what it needs,
    run first in the child; ``ahead(prepared)``: work done in the child while the walk runs,
    handed to ``write`` as ``ahead=`` (:func:`compose.page.write.page_ahead`);
    ``legend(prepared, nodata_seen)``: the legend PNG's bytes, drawn beside the PDF by the
    process drawing the page PNG (``write``'s ``with_png``) and sent here (:meth:`legend`), so
    this process needs no drawing library of its own. ``early(prepared, started, nodata,
    rest, on_guess)``: what of the page can be made during the walk from a guess of the no-data
    layers (:func:`compose.page.write.page_early`; ``started``: what ``ahead`` returned;
    ``rest()`` waits for the end of the walk; ``on_guess(nodata, layout, legend_png)`` sends the
    guess's layout and legend here, used by :meth:`layout` and :meth:`legend` when the walk
    ends with that set), handed to ``write`` as ``early=``. ``html(prepared)``: a part of the
    review page that needs only the prepared render (its ramps section), made in the child
    before the walk's first band is done and sent here (:meth:`html`).

    Create it before other threads start: with ``prepared`` None as soon as the style is
    loaded, then :meth:`attach` the prepared render (the child loads its modules beside this
    process's preparation), or once the render is prepared. The
    :class:`compose.page.write.PageSink` must exist before. Then :meth:`start` with the walk's
    no-data layers, :meth:`layout` for the page layout, :meth:`wait` for the writers' seconds
    (before committing the outputs); :meth:`abort` (always, on the way out) ends a child still
    running.
    """

    def __init__(self, style, prepared, sink, tmp: dict[str, Path], write: Callable, *,
                 warm: Callable[[], None] | None = None, ahead: Callable[[Any], Any] | None = None,
                 legend: Callable[[Any, set[str] | None], bytes] | None = None,
                 early: Callable[..., Any] | None = None,
                 html: Callable[[Any], Any] | None = None,
                 forked: bool | None = None):
        self._style, self._prepared, self._sink, self._tmp = style, prepared, sink, tmp
        self._write = write
        self._warm = warm
        self._ahead = ahead
        self._legend = legend
        self._early = early
        self._html = html
        self._got: dict[str, tuple] = {}
        self.pid: int | None = None
        self._forked = False
        self._inbox: Any = None
        self._outbox: Any = None
        self._nodata: set[str] | None = None
        self._layout = None
        self._seconds: dict[str, float] | None = None
        self._waited = 0.0
        self._shared: dict[int, object] | None = None
        self._handover: int | None = None
        #: the no-data layers guessed from the prepared render's sources (None: no guess)
        self._guess: frozenset[str] | None = None
        if forked if forked is not None else can_fork():
            if prepared is not None:
                self._guess = _guess_of(prepared)
            if prepared is None:    # what the child will get back by reference (same objects)
                from compose.page.handover import shared_objects

                self._shared = shared_objects(style)
                self._handover = _handover_file()
            self._fork()

    @property
    def forked(self) -> bool:
        """Whether the page is written by a forked process."""
        return self._forked

    @property
    def sink(self):
        """The :class:`compose.page.write.PageSink` the walk fills for the page."""
        return self._sink

    def _fork(self) -> None:
        down_r, down_w = os.pipe()
        up_r, up_w = os.pipe()
        try:        # room for the messages sent during the walk, which are read after it
            import fcntl

            fcntl.fcntl(up_w, getattr(fcntl, "F_SETPIPE_SZ", 1031), 1 << 20)
        except (OSError, ImportError):                    # pragma: no cover - a smaller pipe
            pass
        parent = os.getpid()
        pid = os.fork()
        if pid == 0:                                          # the child
            os.close(down_w)
            os.close(up_r)
            _child(down_r, up_w, parent, self)
        os.close(down_r)
        os.close(up_w)
        self.pid = pid
        self._forked = True
        self._outbox = os.fdopen(down_w, "wb")
        self._inbox = os.fdopen(up_r, "rb")
        if self._sink is not None:          # the child encodes the page's raster as it comes
            self._sink.listener = self._rows_done

    def _rows_done(self, rows: int, nodata: set[str] | None = None) -> None:
        if self._outbox is not None:
            try:
                _send(self._outbox, ("rows", (rows, nodata)))
            except OSError:         # the child is gone: start() / layout() report it
                pass

    def attach(self, prepared) -> bool:
        """Hand over the prepared render of a job created without one: to the forked process,
        its canvas, ramps, layers and keep-clear boxes pickled (:mod:`compose.page.handover`).
        False when they cannot be pickled: end this job (:meth:`abort`) and create one with the
        prepared render."""
        if self._prepared is not None:
            return True
        if self.forked:
            from compose.page.handover import pack

            try:
                with span("pack the prepared render"):
                    data = pack((prepared.canvas, prepared.ramps, prepared.layers,
                                 prepared.blocked), self._shared or {})
            except Exception:
                return False
            guess = _guess_of(prepared)
            if self._handover is not None:      # written without waiting for the child
                view, done = memoryview(data), 0
                while done < len(data):
                    done += os.pwrite(self._handover, view[done:], done)
                _close_handover(self)
                _send(self._outbox, ("prepared", ("file", len(data)), guess))
            else:
                _send(self._outbox, ("prepared", data, guess))
        self._prepared = prepared
        return True

    def start(self, nodata_seen: set[str] | None) -> None:
        """The walk is done: let the page be written (in the child; here it waits for
        :meth:`layout`)."""
        self._nodata = nodata_seen
        if self.forked:
            if self._sink is not None:
                self._sink.listener = None
            _send(self._outbox, ("walked", nodata_seen))
            self._outbox.close()
            self._outbox = None

    def _receive(self):
        t = time.perf_counter()
        try:
            message = pickle.load(self._inbox)
        except EOFError:
            message = ("error", None, "")
        self._waited += time.perf_counter() - t
        if message[0] == "error":
            _raise_from(message, self._reap)
        return message

    def _get(self, kind: str) -> tuple:
        """The child's message of ``kind`` (messages come in order: html, guess, layout,
        legend, done)."""
        while kind not in self._got:
            message = self._receive()
            self._got[message[0]] = tuple(message[1:])
        return self._got[kind]

    def _guessed(self) -> tuple | None:
        """The layout and legend PNG the child made during the walk from its guess of the
        no-data layers, when the guess is the set the walk ended with (read from the messages
        until the guess or the final layout comes); else None."""
        while "guess" not in self._got and "layout" not in self._got:
            message = self._receive()
            self._got[message[0]] = tuple(message[1:])
        if "guess" not in self._got:
            return None
        guess, layout, png = self._got["guess"][0]
        final = None if self._nodata is None else frozenset(self._nodata)
        return (layout, png) if guess == final else None

    def html(self) -> Any:
        """What ``html(prepared)`` returned in the child (None when not forked, not asked for,
        or it failed)."""
        if not self.forked or self._html is None:
            return None
        return self._get("html")[0]

    def legend(self) -> bytes | None:
        """The legend PNG drawn by the child (None when not forked or not asked for)."""
        if not self.forked or self._legend is None:
            return None
        guessed = self._guessed()
        if guessed is not None and guessed[1] is not None:
            return guessed[1]
        return self._get("legend")[0]

    def layout(self):
        """The page's :class:`compose.page.layout.PageLayout` (in this process: writes the page
        now)."""
        if self._layout is None:
            if self.forked:
                guessed = self._guessed()
                self._layout = guessed[0] if guessed is not None else self._get("layout")[0]
            else:
                self._seconds, self._layout = self._write(self._style, self._prepared, self._sink,
                                                          self._tmp, self._nodata)
        return self._layout

    def wait(self) -> dict[str, float]:
        """Seconds of each page writer once all three files are written; also ``waited``: how
        long this process waited for the child."""
        self.layout()
        if self._seconds is None:
            self._seconds = dict(self._get("done")[0])
            self._reap()
        return dict(self._seconds, waited=self._waited)

    def _reap(self) -> None:
        _end_child(self, kill=False)

    def abort(self) -> None:
        """End a child still running (the render failed or was interrupted) and reap it."""
        if self._outbox is not None:
            try:
                self._outbox.close()
            except OSError:
                pass
            self._outbox = None
        _close_handover(self)
        _end_child(self, kill=True)
