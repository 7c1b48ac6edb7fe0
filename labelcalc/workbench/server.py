"""The workbench web application (Starlette, server-rendered Jinja2 templates, one CSS and one JS file).

Pages are rendered on the server; the page's script only sends the current state (formula text, markets,
scenario, replacement) as JSON and swaps in the HTML fragments that come back.  Requests that change anything
(save, export) are JSON POSTs, so another web site cannot send them from a plain form; the Host header must be
one of the addresses the server listens on (a guard against DNS rebinding).
"""

from __future__ import annotations

import ipaddress
from datetime import date as _date
from pathlib import Path

from jinja2 import Environment, PackageLoader, select_autoescape
from starlette.applications import Starlette
from starlette.middleware import Middleware
from starlette.requests import Request
from starlette.responses import HTMLResponse, JSONResponse, PlainTextResponse, Response
from starlette.routing import Mount, Route
from starlette.staticfiles import StaticFiles
from starlette.types import ASGIApp, Receive, Scope, Send

from labelcalc import __version__
from labelcalc.errors import InputError, LabelError, Problem
from labelcalc.files import atomic_write
from labelcalc.outputs.panelrun import panels_for
from labelcalc.workbench.editing import apply_fields, comment_count, form_fields, load_rt
from labelcalc.workbench.views import State, chart, choices, compute, number, page_data, trace
from labelcalc.workbench.workspace import OutsideFolder, Workspace

STATIC = Path(__file__).parent / "static"
OUT_FOLDER = "labelcalc-out/workbench"

_env = Environment(loader=PackageLoader("labelcalc.workbench", "templates"), autoescape=select_autoescape())


def render(name: str, **ctx) -> str:
    return _env.get_template(name).render(version=__version__, **ctx)


def is_loopback(host: str) -> bool:
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def host_of(header: str) -> str:
    """The host name of a Host header without its port: '[::1]:8765' -> '::1', 'localhost:80' -> 'localhost'."""
    if header.startswith("["):
        return header[1 : header.find("]")] if "]" in header else header
    return header.rsplit(":", 1)[0] if header.count(":") == 1 else header


class LoopbackHostOnly:
    """Refuse requests whose Host header is not a loopback name or address, so a web page whose domain is made to
    resolve to 127.0.0.1 (DNS rebinding) cannot talk to the workbench.  Starlette's TrustedHostMiddleware is not
    used because it cuts an IPv6 literal such as '[::1]:8765' at its first colon."""

    def __init__(self, app: ASGIApp) -> None:
        self.app = app

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] in ("http", "websocket"):
            headers = dict(scope.get("headers") or [])
            name = host_of(headers.get(b"host", b"").decode("latin-1"))
            if not (is_loopback(name) or name == "testserver"):
                await PlainTextResponse("the workbench answers only on this computer's loopback address", 400)(
                    scope, receive, send
                )
                return
        await self.app(scope, receive, send)


def _problems_json(problems: list[Problem]) -> list[dict]:
    return [{"field": p.field, "line": p.line, "text": str(p)} for p in problems]


def create_app(ws: Workspace, *, host: str = "127.0.0.1") -> Starlette:
    """The application for one opened folder."""

    sweeps: dict = {}

    async def body_of(request: Request) -> dict:
        if request.headers.get("content-type", "").split(";")[0].strip() != "application/json":
            raise InputError(Problem("requests must be JSON"))
        try:
            data = await request.json()
        except ValueError:
            raise InputError(Problem("the request is not valid JSON")) from None
        if not isinstance(data, dict):
            raise InputError(Problem("requests must be a JSON object"))
        return data

    async def index(request: Request) -> Response:
        return HTMLResponse(render("index.html", root=ws.root.name, products=ws.products(), single=ws.only))

    async def product(request: Request) -> Response:
        rel = request.query_params.get("path", "")
        path = ws.formula_path(rel)
        text = ws.read_text(path)
        st = State(ws.rel(path), text, list(ws.markets))
        comp = compute(ws, st)
        return HTMLResponse(
            render(
                "product.html",
                path=st.path,
                text=text,
                markets=ws.market_codes(),
                chosen=st.markets,
                choices=choices(comp, ws, path),
                default_replace=_default_replace(comp),
                **fragments(st, comp, text),
            )
        )

    def fragments(st: State, comp, text: str) -> dict:
        try:
            data = load_rt(text, st.path)
            fields = form_fields(data)
        except LabelError:
            fields = []
        fmap = {p.field: str(p) for p in comp.problems if p.field}
        names = {f.name for f in fields}
        general = [str(p) for p in comp.problems if not p.field or p.field not in names]
        return {
            "form_html": render("form.html", fields=fields, errors=fmap, general=general),
            "results_html": render("results.html", st=st, data=page_data(ws, st, comp)),
            "chart_html": render("chart.html", chart=_chart_or_problem(st, comp), replacing=st.replacing),
        }

    def _chart_or_problem(st: State, comp):
        try:
            return chart(ws, st, comp, sweeps)
        except LabelError as exc:
            return {"problem": str(exc)}

    async def update(request: Request) -> Response:
        """The form or the YAML changed: write the form into the YAML (comments kept), validate, recompute."""
        body = await body_of(request)
        st = State.from_json(body, ws.markets)
        ws.formula_path(st.path)
        notice = ""
        if body.get("source") == "form":
            before = st.text
            try:
                st.text = apply_fields(
                    st.text,
                    st.path,
                    dict(body.get("fields") or {}),
                    add=body.get("add"),
                    remove=body.get("remove") or (),
                )
            except LabelError as exc:
                comp = compute(ws, st)
                comp.problems = exc.problems
                return JSONResponse(
                    {"yaml": st.text, "problems": _problems_json(exc.problems), **fragments(st, comp, st.text)}
                )
            lost = comment_count(before) - comment_count(st.text)
            if lost > 0:
                notice = f"{lost} comment(s) could not be kept by this edit and will be lost when you save."
        comp = compute(ws, st)
        return JSONResponse(
            {
                "yaml": st.text,
                "notice": notice,
                "problems": _problems_json(comp.problems),
                **fragments(st, comp, st.text),
            }
        )

    async def trace_view(request: Request) -> Response:
        body = await body_of(request)
        st = State.from_json(body, ws.markets)
        comp = compute(ws, st)
        if comp.problems:
            raise InputError(comp.problems)
        t = trace(
            comp,
            str(body.get("market")),
            int(number(body.get("scenario_index"))),
            str(body.get("nutrient")),
            str(body.get("basis")),
        )
        return HTMLResponse(render("trace.html", t=t))

    async def save(request: Request) -> Response:
        """Write the text back to its file atomically; the text must at least parse as YAML."""
        body = await body_of(request)
        st = State.from_json(body, ws.markets)
        path = ws.formula_path(st.path)
        load_rt(st.text, st.path)
        comp = compute(ws, st)
        lost = comment_count(ws.read_text(path)) - comment_count(st.text)

        def write(tmp: Path) -> None:
            tmp.write_text(st.text, encoding="utf-8")

        atomic_write(path, write)
        msg = f"saved {st.path}"
        if lost > 0:
            msg += f"; {lost} comment(s) of the file on disk are not in the saved text"
        if comp.problems:
            msg += f"; the formula still has {len(comp.problems)} problem(s) to fix"
        return JSONResponse({"message": msg, "problems": _problems_json(comp.problems)})

    async def export(request: Request) -> Response:
        """Panel draft PDFs and calculation sheets of the saved file, written with the same writers as the CLI."""
        body = await body_of(request)
        st = State.from_json(body, ws.markets)
        path = ws.formula_path(st.path)
        if ws.read_text(path) != st.text:
            raise InputError(Problem("the formula has unsaved changes", file=st.path, fix="save it first, then export"))
        comp = compute(ws, st)
        if comp.problems:
            raise InputError(comp.problems)
        assert comp.library is not None and comp.formula is not None
        out = ws.root / OUT_FOLDER
        if not out.resolve().is_relative_to(ws.root):  # e.g. labelcalc-out is a link to another place
            raise OutsideFolder(OUT_FOLDER)
        out.mkdir(parents=True, exist_ok=True)
        files, failures = panels_for(
            path, comp.library, ws.packs(st.markets), out, _date.today().isoformat(), comp.reference
        )
        return JSONResponse(
            {
                "message": "wrote " + ", ".join(ws.rel(f) for f in files),
                "failures": failures,
                "draft": "DRAFT: verify against current local regulation with a qualified regulatory professional.",
            }
        )

    async def label_error(request: Request, exc: Exception) -> Response:
        assert isinstance(exc, LabelError)
        if "application/json" in request.headers.get("content-type", ""):
            return JSONResponse({"problems": _problems_json(exc.problems), "error": str(exc)}, status_code=400)
        return HTMLResponse(render("error.html", message=str(exc)), status_code=400)

    async def outside(request: Request, exc: Exception) -> Response:
        msg = "that path is outside the opened folder; only files inside it can be opened"
        if "application/json" in request.headers.get("content-type", ""):
            return JSONResponse({"error": msg}, status_code=403)
        return HTMLResponse(render("error.html", message=msg), status_code=403)

    async def unexpected(request: Request, exc: Exception) -> Response:
        """A fault of labelcalc itself, not of the input: one line, no traceback in the page."""
        msg = f"labelcalc could not work this out ({type(exc).__name__}: {exc}); please report it with the formula"
        if "application/json" in request.headers.get("content-type", ""):
            return JSONResponse({"error": msg}, status_code=500)
        return HTMLResponse(render("error.html", message=msg), status_code=500)

    return Starlette(
        routes=[
            Route("/", index),
            Route("/product", product),
            Route("/api/update", update, methods=["POST"]),
            Route("/api/trace", trace_view, methods=["POST"]),
            Route("/api/save", save, methods=["POST"]),
            Route("/api/export", export, methods=["POST"]),
            Mount("/static", StaticFiles(directory=STATIC), name="static"),
        ],
        middleware=[Middleware(LoopbackHostOnly)] if is_loopback(host) else [],
        exception_handlers={LabelError: label_error, OutsideFolder: outside, Exception: unexpected},
    )


def _default_replace(comp) -> str:
    """The first oil or fat the formula uses (the usual thing to replace), if any."""
    if comp.formula is None:
        return ""
    for ing in comp.formula.ingredients_used():
        if {"oil", "fat"} & set(ing.kinds):
            return ing.id
    return ""


def serve(ws: Workspace, host: str = "127.0.0.1", port: int = 8765) -> None:  # pragma: no cover - runs the server
    import uvicorn

    uvicorn.run(create_app(ws, host=host), host=host, port=port, log_level="warning")
