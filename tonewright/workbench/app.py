"""The workbench's web application: a JSON API over the same workflows as the command line,
and the static page that uses it.

Every handler does what a command does: read (through the same door, so a bad field gives
the CLI's one-line message), call a workflow, and return plain JSON. Errors are
``{"error": "..."}`` with status 422 (bad input), 404 (no such file) or 409 (would overwrite).
Only the workshop folder is read or written; names from the browser pass ``Workshop.path``.
"""

from __future__ import annotations

import asyncio
import json
import math
import os
import secrets
import tomllib
from contextlib import asynccontextmanager
from importlib import resources
from pathlib import Path
from typing import Any

import numpy as np
from fastapi import FastAPI, Request
from fastapi.responses import FileResponse, HTMLResponse, JSONResponse, StreamingResponse
from pydantic import BaseModel, ConfigDict
from threadpoolctl import threadpool_limits

from tonewright.bench import cut_of_step
from tonewright.cli_support import atomic_write_bytes, atomic_write_text
from tonewright.errors import InputError
from tonewright.workbench.folder import Workshop
from tonewright.workbench.jobs import Emit, JobBoard
from tonewright.workbench.store import Store

__all__ = ["MAX_UPLOAD_BYTES", "create_app"]

# A 30 s stereo 48 kHz float WAV is 11.5 MB; a tap is a few seconds (common practice).
MAX_UPLOAD_BYTES = 16 * 1024 * 1024
LOCAL_HOSTS = {"127.0.0.1", "::1", "localhost", "testclient"}
STATUS_OF = {"input": 422, "missing": 404, "exists": 409}
CAUTION = (
    "Material cannot be put back: cut less than advised, tap again, and let the next "
    "reading guide the next cut. Use dust extraction and eye and hearing protection, and "
    "follow your machine's manual and trained practice."
)


class _Body(BaseModel):
    model_config = ConfigDict(extra="forbid")


class PartBody(_Body):
    name: str
    text: str
    replace: bool = False


class CheckBody(_Body):
    text: str
    name: str = "part.toml"


class DesignBody(_Body):
    name: str
    fidelity: str | None = None
    replace: bool = False


class ShopBody(_Body):
    name: str
    accept_missed_design: bool = False
    replace: bool = False


class InstrumentBody(_Body):
    name: str
    fidelity: str | None = None
    jobs: int = 1


class CutBody(_Body):
    """A cut done at the bench: a step of the advice as made (mm), or a note of another cut."""

    bar: str
    description: str
    windows_mm: list[tuple[float, float]] | None = None
    depth_mm: float | None = None
    tool_width_mm: float | None = None
    eased_edge_mm: float = 0.0


MAX_RECORDED_DEPTH_MM = 3.0  # the advice's own limit on one step


def _error(message: str, status: int = 422) -> JSONResponse:
    return JSONResponse({"error": message}, status_code=status)


def _finite(value: Any, digits: int = 4) -> float | None:
    v = float(value)
    return round(v, digits) if math.isfinite(v) else None


# -- part files -------------------------------------------------------------------------------


def _parse_part_text(text: str, name: str):
    """The CLI's door for a part file's text: TOML, then the typed part file."""
    from tonewright.partfile import parse_part

    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{name}: not valid TOML ({exc})") from None
    return parse_part(raw, where=name)


def _kind_of(text: str) -> str:
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError:
        return "unreadable"
    for kind in ("bar", "tube", "string"):
        if kind in raw:
            return kind
    return "instrument" if "lowest" in raw and "highest" in raw else "other"


def _part_summary(part_file) -> dict[str, Any]:
    part = part_file.bar or part_file.tube or part_file.string
    kind = "bar" if part_file.bar else "tube" if part_file.tube else "string"
    out: dict[str, Any] = {"kind": kind, "title": part_file.title, "length_mm": part.length * 1e3}
    if part_file.bar is not None:
        out |= {"width_mm": part.width * 1e3, "thickness_mm": part.thickness * 1e3}
    out["has_target"] = part_file.target is not None
    return out


def _modes_with_shapes(path: Path, count: int) -> dict[str, Any]:
    """The ``modes`` table (the certifying model, named), each mode with its shape along the
    part scaled to 1; shapes are drawn from the beam model's mode of the same family and
    order (the 3D model's shapes are volumes)."""
    from tonewright.forward import families_of, solve
    from tonewright.modes_report import modes_payload, part_modes
    from tonewright.partfile import load_part

    part_file, base = load_part(path)
    solved = part_modes(part_file, base, count)
    part = part_file.to_part(base)
    beam = solve(part, dict.fromkeys(families_of(part), count), tol_cents=0.1)
    shapes = {(m.family, m.order): m for m in beam.modes}
    x = np.linspace(0.0, part.length, 121)
    payload = modes_payload(solved, 440.0)
    for entry in payload["modes"]:
        m = shapes.get((entry["family"], entry["order"]))
        if m is None:
            continue
        y = np.asarray(m.shape(x), dtype=float)
        y = y / (float(np.max(np.abs(y))) or 1.0)
        entry["shape"] = {"x_mm": np.round(x * 1e3, 2).tolist(), "y": np.round(y, 4).tolist()}
    payload["title"] = part_file.title or path.stem
    return payload


# -- bench ---------------------------------------------------------------------------------


def _looks_like_audio(data: bytes) -> bool:
    heads = (b"RIFF", b"RIFX", b"RF64", b"fLaC", b"OggS", b"FORM", b"ID3", b"\xff\xfb")
    return any(data.startswith(h) for h in heads)


def _tap_payload(report) -> dict[str, Any]:
    """The tap's lines with what each one is (the same names as ``listen``)."""
    labels = report.labels or (None,) * len(report.result.partials)
    lines = [
        {
            "frequency_hz": _finite(p.frequency_hz, 3),
            "level_db": _finite(p.level_db, 1),
            "label": None if lab is None else lab.text,
            "from_bar": True if lab is None else lab.from_bar,
            "method": p.method,
        }
        for p, lab in zip(report.result.partials, labels, strict=True)
    ]
    return {
        "file": report.name,
        "rate": report.rate,
        "partials": lines,
        "identified_by": report.basis,
        "strike_hz": report.strike_hz,
        "warnings": list(report.warnings),
    }


def _analyse_tap(workshop: Workshop, bar: str, wav: Path, cuts_done=()) -> dict[str, Any]:
    """Listen to the tap; with a part file that has a target, advise the next cut too, on the
    bar as the file gives it with the recorded cuts applied."""
    from tonewright.bench import AdviseRequest, advise_bar, listen_to_tap, min_thickness_of
    from tonewright.partfile import load_part

    part_path = workshop.path(bar, "bar")
    part_file, base = load_part(part_path)
    kind = "chime" if part_file.tube is not None else "bar"
    tap = listen_to_tap(wav, kind=kind, part=part_path)
    out: dict[str, Any] = {"tap": _tap_payload(tap), "advice": None, "caution": CAUTION}
    if part_file.bar is not None and part_file.target is not None:
        request = AdviseRequest(
            part_file=part_file,
            base=base,
            title=part_file.title or part_path.stem,
            min_thickness_m=min_thickness_of(part_file),
            wav=wav,
            cuts_done=tuple(cuts_done),
        )
        out["advice"] = dict(advise_bar(request).payload)
    return out


def create_app(folder: Path, *, allow_remote: bool = False) -> FastAPI:
    """The workbench application on ``folder`` (the workshop)."""
    workshop = Workshop.open(folder)
    store = Store(workshop.state / "workshop.sqlite")
    board = JobBoard()

    @asynccontextmanager
    async def lifespan(_: FastAPI):
        yield
        board.shutdown()

    app = FastAPI(title="tonewright workbench", docs_url=None, redoc_url=None, lifespan=lifespan)
    app.state.workshop, app.state.store, app.state.board = workshop, store, board
    static = resources.files("tonewright.workbench") / "static"

    @app.middleware("http")
    async def local_only(request: Request, call_next):
        host = request.client.host if request.client else ""
        if not allow_remote and host not in LOCAL_HOSTS:
            return _error(
                "the workbench answers this computer only (start it with "
                "--allow-remote to share it)",
                403,
            )
        return await call_next(request)

    @app.exception_handler(InputError)
    async def input_error(_: Request, exc: InputError) -> JSONResponse:
        return _error(str(exc))

    @app.exception_handler(FileNotFoundError)
    async def missing(_: Request, exc: FileNotFoundError) -> JSONResponse:
        name = Path(exc.filename).name if exc.filename else "file"
        return _error(f"file not found: {name}", 404)

    @app.get("/", response_class=HTMLResponse)
    def page() -> str:
        return (static / "index.html").read_text(encoding="utf-8")

    @app.get("/static/{name}")
    def static_file(name: str):
        if name not in ("app.js", "style.css"):
            return _error(f"no such file: {name}", 404)
        media = "text/javascript" if name.endswith(".js") else "text/css"
        return HTMLResponse((static / name).read_text(encoding="utf-8"), media_type=media)

    # -- the workshop -------------------------------------------------------------------

    @app.get("/api/workshop")
    def overview() -> dict[str, Any]:
        files = []
        for name in workshop.part_files():
            text = (workshop.root / name).read_text(encoding="utf-8", errors="replace")
            files.append({"name": name, "kind": _kind_of(text)})
        bench = [f["name"] for f in files if f["kind"] in ("bar", "tube")]
        return {
            "folder": str(workshop.root),
            "files": files,
            "bench_bars": bench + workshop.designed_parts(),
            "history": store.bars_with_history(),
            "running": [{"id": j.id, "kind": j.kind, "name": j.name} for j in board.running()],
        }

    @app.get("/api/part")
    def read_part(name: str) -> dict[str, Any]:
        path = workshop.path(name, "name")
        text = path.read_text(encoding="utf-8")
        try:
            summary: dict[str, Any] | None = _part_summary(_parse_part_text(text, path.name))
            error = None
        except InputError as exc:
            summary, error = None, str(exc)
        return {"name": name, "text": text, "summary": summary, "error": error}

    @app.post("/api/part/check")
    def check_part(body: CheckBody) -> dict[str, Any]:
        return {"ok": True, "summary": _part_summary(_parse_part_text(body.text, body.name))}

    @app.put("/api/part")
    def save_part(body: PartBody):
        path = workshop.path(body.name, "name")
        if path.suffix.lower() != ".toml":
            raise InputError(f"name {body.name!r}: a part file ends in .toml")
        part_file = _parse_part_text(body.text, path.name)  # refuse before writing
        if path.exists() and not body.replace:
            return _error(f"{body.name} exists already; tick 'replace' to save over it", 409)
        atomic_write_text(path, body.text, overwrite=body.replace)
        return {"ok": True, "name": body.name, "summary": _part_summary(part_file)}

    @app.get("/api/modes")
    def modes(name: str, count: int = 4) -> dict[str, Any]:
        if not 1 <= count <= 12:
            raise InputError(f"count {count}: give 1 to 12 modes a family")
        with threadpool_limits(limits=1, user_api="blas"):
            return _modes_with_shapes(workshop.path(name, "name"), count)

    @app.get("/api/file")
    def download(path: str):
        full = workshop.path(path, "path")
        if not full.is_file():
            return _error(f"file not found: {path}", 404)
        return FileResponse(full, filename=full.name)

    # -- designs ------------------------------------------------------------------------

    def _design_folder_listing(name: str) -> dict[str, Any] | None:
        folder = workshop.design_dir(name)
        result = folder / "result.json"
        if not result.is_file():
            return None
        payload = json.loads(result.read_text(encoding="utf-8"))
        files = sorted(workshop.relative(p) for p in folder.rglob("*") if p.is_file())
        return {
            "folder": workshop.relative(folder),
            "converged": payload.get("converged"),
            "message": payload.get("message"),
            "certified_by": payload.get("certified_by"),
            "partials": payload.get("partials"),
            "unwanted_modes": payload.get("unwanted_modes"),
            "files": files,
        }

    @app.get("/api/design")
    def design_state(name: str) -> dict[str, Any]:
        workshop.path(name, "name")
        return {"name": name, "design": _design_folder_listing(name)}

    @app.post("/api/design")
    def start_design(body: DesignBody) -> dict[str, Any]:
        from tonewright.design import build_problem, design_report
        from tonewright.design_files import check_out_dir, summary_lines, write_design
        from tonewright.partfile import load_part

        path = workshop.path(body.name, "name")
        if body.fidelity is not None and body.fidelity not in ("beam", "plane", "solid"):
            raise InputError(f"fidelity {body.fidelity!r}: choose beam, plane or solid")
        part_file, base = load_part(path)
        problem = build_problem(part_file, base)
        out = workshop.design_dir(body.name)
        try:
            check_out_dir(out, force=body.replace)
        except InputError:
            return _error(
                f"{workshop.relative(out) if out.exists() else out.name} holds a design "
                "already; tick 'replace' to design again",
                409,
            )
        budget = problem.table.budget

        def work(emit: Emit) -> dict[str, Any]:
            def progress(stage: str, solves: int, worst: float) -> None:
                emit({"stage": stage, "solves": solves, "budget": budget, "worst_cents": worst})

            report = design_report(problem, progress, body.fidelity)
            write_design(report, out, force=body.replace)
            listing = _design_folder_listing(body.name) or {}
            return {"summary": summary_lines(report), **listing}

        run_id = store.start_run("design", body.name)
        job = board.submit("design", body.name, _recorded(store, run_id, work))
        return {"job": job.id}

    @app.post("/api/shop")
    def shop(body: ShopBody) -> dict[str, Any]:
        from tonewright.shop import write_all
        from tonewright.shop_run import load_shop_source, marked_missed

        workshop.path(body.name, "name")
        folder = workshop.design_dir(body.name)
        result = folder / "result.json"
        if not result.is_file():
            raise InputError(f"{body.name}: design the bar first (no result yet)")
        source = load_shop_source(result)
        if source.shop is None:
            raise InputError(f"{body.name}: shop files here are for bars only; use 'shop'")
        shop_part = source.shop
        if source.design is not None and not source.design.converged:
            if not body.accept_missed_design:
                raise InputError(
                    f"this design misses its target ({source.design.message}); tick "
                    "'accept a missed design' to draw it anyway, marked as missed"
                )
            shop_part = marked_missed(shop_part, source.design.message)
        written = write_all(shop_part, folder / "shop", force=body.replace)
        return {"files": [workshop.relative(p) for p in written]}

    # -- instruments --------------------------------------------------------------------

    @app.get("/api/instrument")
    def instrument(name: str) -> dict[str, Any]:
        import csv
        import io

        from tonewright.instrument import load_instrument, plan_instrument

        spec, base = load_instrument(workshop.path(name, "name"))
        plan = plan_instrument(spec, base)
        run = workshop.run_dir(name)
        rows: dict[str, dict[str, str]] = {}
        if (run / "summary.csv").is_file():
            text = (run / "summary.csv").read_text(encoding="utf-8")
            for row in csv.DictReader(io.StringIO(text)):
                note = row.get("note") or next(iter(row.values()), "")
                rows[note] = row
        history = store.bars_with_history()
        why = {c.note: c.explanation for c in plan.schedule}  # blanks the tool sized from stock
        bars = []
        for b in plan.bars:
            part = b.part.get("bar", {})
            row = rows.get(b.note)
            designed = run / "bars" / b.note / "part.toml"
            bench_name = workshop.relative(designed) if designed.is_file() else None
            bench = history.get(bench_name or "", {"taps": 0, "cuts": 0, "last_tap": None})
            status = (row or {}).get("status", "not designed")
            if bench["cuts"]:
                status = "cut"
            if _tuned(bench["last_tap"]):
                status = "tuned"
            bars.append(
                {
                    "note": b.note,
                    "length_mm": part.get("length"),
                    "width_mm": part.get("width"),
                    "thickness_mm": part.get("thickness"),
                    "status": status,
                    "design_status": (row or {}).get("status", "not designed"),
                    "blank_reason": why.get(b.note),
                    "summary": row,
                    "bench": {"name": bench_name, "taps": bench["taps"], "cuts": bench["cuts"]},
                }
            )
        figures = [
            workshop.relative(run / f)
            for f in ("blanks.png", "dimensions.png", "errors.png")
            if (run / f).is_file()
        ]
        return {"name": name, "title": plan.title, "bars": bars, "figures": figures}

    @app.post("/api/instrument/run")
    def run_instrument_job(body: InstrumentBody) -> dict[str, Any]:
        from tonewright.instrument_run import plan_run, run_instrument, write_instrument

        path = workshop.path(body.name, "name")
        out = workshop.run_dir(body.name)
        run = plan_run(path, out, jobs=body.jobs, fidelity=body.fidelity)  # resumes by design

        def work(emit: Emit) -> dict[str, Any]:
            total = len(run.work)
            done: list[str] = []

            def on_bar(note: str) -> None:
                done.append(note)
                emit({"bar": note, "finished": len(done), "total": total})

            report = run_instrument(run, on_bar)
            write_instrument(report, out)
            return {"met": report.met, "bars": len(report.rows), "reused": list(report.reused)}

        run_id = store.start_run("instrument", body.name)
        job = board.submit("instrument", body.name, _recorded(store, run_id, work))
        return {"job": job.id, "to_design": len(run.work), "reused": len(run.reused)}

    # -- jobs -----------------------------------------------------------------------------

    @app.get("/api/jobs/{job_id}")
    def job_state(job_id: int):
        job = board.get(job_id)
        if job is None:
            return _error(f"no job {job_id}", 404)
        last = job.events[-1] if job.events else {}
        return {
            "id": job.id,
            "kind": job.kind,
            "name": job.name,
            "finished": job.finished,
            "last": last,
        }

    @app.get("/api/jobs/{job_id}/events")
    async def job_events(job_id: int):
        job = board.get(job_id)
        if job is None:
            return _error(f"no job {job_id}", 404)

        async def stream():
            sent = 0
            while True:
                events = await asyncio.to_thread(board.wait_events, job, sent, 5.0)
                for event in events:
                    yield f"data: {json.dumps(event)}\n\n"
                sent += len(events)
                if job.finished and sent >= len(job.events):
                    return
                if not events:
                    yield ": still working\n\n"  # keeps proxies and the browser listening

        return StreamingResponse(stream(), media_type="text/event-stream")

    # -- the bench ------------------------------------------------------------------------

    @app.post("/api/bench/tap")
    async def tap(bar: str, request: Request):
        workshop.path(bar, "bar")
        data = bytearray()
        async for chunk in request.stream():
            data += chunk
            if len(data) > MAX_UPLOAD_BYTES:
                return _error(
                    f"recording larger than {MAX_UPLOAD_BYTES // 2**20} MB; a tap needs a "
                    "few seconds",
                    413,
                )
        if not data:
            raise InputError("recording: empty upload; record or drop a WAV file")
        if not _looks_like_audio(bytes(data)):
            raise InputError("recording: not an audio file (give WAV, FLAC or OGG)")
        taps = workshop.state / "taps"
        name = f"{Path(bar).stem}-{secrets.token_hex(4)}.wav"
        atomic_write_bytes(taps / name, bytes(data))
        try:
            with threadpool_limits(limits=1, user_api="blas"):
                done = [cut_of_step(e.data) for e in store.history(bar) if e.kind == "cut"]
                cuts = [c for c in done if c is not None]
                result = await asyncio.to_thread(_analyse_tap, workshop, bar, taps / name, cuts)
        except InputError:
            os.unlink(taps / name)
            raise
        entry = store.add(bar, "tap", {"recording": name, **result})
        return {"id": entry.id, **result}

    @app.post("/api/bench/cut")
    def cut(body: CutBody) -> dict[str, Any]:
        from tonewright.partfile import load_part

        part_file, _ = load_part(workshop.path(body.bar, "bar"))
        length_mm = (part_file.bar or part_file.tube or part_file.string).length * 1e3
        if body.depth_mm is not None and not (
            math.isfinite(body.depth_mm) and 0 < body.depth_mm <= MAX_RECORDED_DEPTH_MM
        ):
            raise InputError(
                f"depth_mm {body.depth_mm:g}: give the depth cut, above 0 and at most "
                f"{MAX_RECORDED_DEPTH_MM:g} mm a step"
            )
        for a, b in body.windows_mm or []:
            if not (math.isfinite(a) and math.isfinite(b) and 0 <= a < b <= length_mm):
                raise InputError(
                    f"windows_mm [{a:g}, {b:g}]: give start < end within the bar, 0 to "
                    f"{length_mm:g} mm"
                )
        for name in ("tool_width_mm", "eased_edge_mm"):
            value = getattr(body, name)
            if value is not None and not (math.isfinite(value) and value >= 0):
                raise InputError(f"{name} {value:g}: give a length in mm, 0 or more")
        if body.windows_mm and body.depth_mm is None:
            raise InputError("depth_mm: a cut over windows needs its depth")
        entry = store.add(body.bar, "cut", body.model_dump())
        return {"id": entry.id}

    @app.get("/api/bench/history")
    def history(bar: str) -> dict[str, Any]:
        workshop.path(bar, "bar")
        return {
            "bar": bar,
            "entries": [
                {"id": e.id, "kind": e.kind, "at": e.at, "data": e.data} for e in store.history(bar)
            ],
        }

    return app


def _tuned(last_tap: dict[str, Any] | None) -> bool:
    """Every tuned partial of the last tap within its tolerance (measured, not modelled)."""
    advice = (last_tap or {}).get("advice")
    if not advice or not advice.get("partials"):
        return False
    return all(
        p["from"] == "measured" and abs(p["now_cents"]) <= p["tolerance_cents"]
        for p in advice["partials"]
    )


def _recorded(store: Store, run_id: int, work):
    """``work`` whose end (met, missed, error) is written to the runs table."""

    def wrapped(emit: Emit) -> dict[str, Any]:
        try:
            result = work(emit)
        except Exception as exc:
            store.finish_run(run_id, "error", str(exc))
            raise
        status = "met" if result.get("converged", result.get("met")) else "finished"
        store.finish_run(run_id, status, str(result.get("message", "")))
        return result

    return wrapped
