"""The browser workspace: a Starlette application over the same services as the command line.

Pages are rendered on the server from Jinja2 templates under ``templates/web/`` (autoescape, StrictUndefined);
the only script is the phone sheet's, which lives in the field pack.  Every asset ships in the package.

Who may do what (``WebConfig``):

* single user (SQLite): the server listens on loopback only; a one-time token printed at start-up opens a
  session, as owner;
* shared programme (PostgreSQL): people sign in (``web_user`` table, scrypt hashes); each is a reader, a
  recorder or an owner, and the workspace works in the database under that group's role
  (``options=-c role=<db>_<group>``), so the database refuses whatever the group may not do, as it does
  for the command line (``monitor access``).  The pages also hide and refuse those actions.

Defences: a CSRF token on every form (checked on every POST), session cookies HttpOnly and SameSite=Strict
(and Secure when served over https), a sign-in attempt limit, downloads confined to their folder, a
Content-Security-Policy without inline script, and names from the database always inserted as text.
"""

from __future__ import annotations

import datetime as dt
import io
import secrets
import threading
import time
import zipfile
from collections.abc import Awaitable, Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import jinja2
from starlette.applications import Starlette
from starlette.concurrency import run_in_threadpool
from starlette.datastructures import UploadFile
from starlette.requests import Request
from starlette.responses import FileResponse, HTMLResponse, RedirectResponse, Response
from starlette.routing import Mount, Route
from starlette.staticfiles import StaticFiles

from monitor import __version__
from monitor.config import templates_dir
from monitor.errors import InputError, MonitorError
from monitor.security import SignInLimiter, new_token, safe_file, same_token
from monitor.services import web_users
from monitor.web import pages

SESSION_COOKIE = "monitor_session"
SESSION_IDLE_SECONDS = 8 * 3600
MAX_UPLOAD_BYTES = 20 * 1024 * 1024
CSP = ("default-src 'none'; img-src 'self' data:; style-src 'self'; script-src 'none'; form-action 'self'; "
       "frame-ancestors 'none'; base-uri 'none'")


@dataclass
class WebConfig:
    """How the workspace runs.

    db : the database URL or SQLite path (the serving login's, on PostgreSQL)
    workdir : folder for uploads, field packs and reports (downloads never leave it)
    shared : people sign in (PostgreSQL); otherwise the one-time token opens a single-user session
    role_db : database URL per role (reader, recorder, owner) used for that person's work
    secure_cookies : mark cookies Secure (served over https)
    open_token : the one-time token (single user)
    """

    db: str
    workdir: Path
    programme: str | None = None
    shared: bool = False
    role_db: dict[str, str] = field(default_factory=dict)
    secure_cookies: bool = False
    open_token: str | None = None

    def db_for(self, role: str) -> str:
        return self.role_db.get(role, self.db)


@dataclass
class WebSession:
    sid: str
    csrf: str
    login: str | None = None
    role: str | None = None
    last_seen: float = field(default_factory=time.monotonic)
    flashes: list[tuple[str, str]] = field(default_factory=list)
    uploads: dict[str, dict] = field(default_factory=dict)


class Sessions:
    """Server-side sessions: the cookie carries only a random id."""

    def __init__(self) -> None:
        self._by_id: dict[str, WebSession] = {}
        self._mutex = threading.Lock()

    def get(self, sid: str | None) -> WebSession | None:
        now = time.monotonic()
        with self._mutex:
            session = self._by_id.get(sid or "")
            if session is None:
                return None
            if now - session.last_seen > SESSION_IDLE_SECONDS:
                del self._by_id[session.sid]
                return None
            session.last_seen = now
            return session

    def new(self) -> WebSession:
        session = WebSession(sid=new_token(), csrf=new_token())
        with self._mutex:
            self._by_id[session.sid] = session
        return session

    def renew(self, old: WebSession, login: str, role: str) -> WebSession:
        """A fresh id on sign-in (no session fixation)."""
        with self._mutex:
            self._by_id.pop(old.sid, None)
        session = self.new()
        session.login, session.role = login, role
        return session

    def drop(self, session: WebSession) -> None:
        with self._mutex:
            self._by_id.pop(session.sid, None)


class Forbidden(Exception):
    def __init__(self, message: str, status: int = 403):
        super().__init__(message)
        self.status = status


@dataclass
class Ctx:
    """What a page handler gets: the request, its session, the form (POST) and the database for the role."""

    request: Request
    session: WebSession
    config: WebConfig
    app: WorkspaceApp
    form: dict[str, Any] = field(default_factory=dict)
    files: dict[str, UploadFile] = field(default_factory=dict)
    raw_form: Any = None

    @property
    def db(self) -> str:
        return self.config.db_for(self.session.role or "reader")

    @property
    def who(self) -> str:
        return f"web:{self.session.login}"

    def flash(self, kind: str, message: str) -> None:
        self.session.flashes.append((kind, message))

    def may(self, need: str) -> bool:
        return self.session.role is not None and web_users.RANK[self.session.role] >= web_users.RANK[need]

    def render(self, template: str, status: int = 200, **values: Any) -> HTMLResponse:
        return self.app.render(self, template, status, **values)

    def redirect(self, url: str) -> RedirectResponse:
        return RedirectResponse(url, status_code=303)


Handler = Callable[[Ctx], Response]


class WorkspaceApp:
    """Holds the configuration, sessions, templates and caches; builds the Starlette application."""

    def __init__(self, config: WebConfig, limiter: SignInLimiter | None = None):
        self.config = config
        self.sessions = Sessions()
        self.limiter = limiter or SignInLimiter()
        self.token_used = config.open_token is None
        self.cache: dict[tuple, Any] = {}
        self.cache_lock = threading.Lock()
        self.env = jinja2.Environment(
            loader=jinja2.FileSystemLoader(str(templates_dir())),
            autoescape=jinja2.select_autoescape(default=True, default_for_string=True),
            undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True)
        self.env.filters["num"] = pages.number_text
        for sub in ("uploads", "packs", "reports"):
            (config.workdir / sub).mkdir(parents=True, exist_ok=True)

    # --- sessions, rights and CSRF ------------------------------------------------------------------------

    def wrap(self, handler: Handler, need: str | None = "reader") -> Callable[[Request], Awaitable[Response]]:
        async def endpoint(request: Request) -> Response:
            session = self.sessions.get(request.cookies.get(SESSION_COOKIE))
            fresh = session is None
            if session is None:
                session = self.sessions.new()
            ctx = Ctx(request=request, session=session, config=self.config, app=self)
            try:
                if request.method == "POST":
                    await self._read_form(ctx)
                    if not same_token(ctx.form.get("csrf"), session.csrf):
                        raise Forbidden("This form has expired or did not come from this workspace "
                                        "(its security token is missing or wrong). Go back, reload and try again.")
                if need is not None and session.role is None:
                    if self.config.shared:
                        response: Response = ctx.redirect("/signin")
                    else:
                        raise Forbidden("Open the workspace with the link printed when `monitor serve` started.",
                                        401)
                elif need is not None and not ctx.may(need):
                    raise Forbidden(f"Your role ({session.role}) may not do this; it needs a {need}.")
                else:
                    # pages call the services, which block (database, fitting): off the event loop, so one long
                    # request (building the report) does not hold up everyone else's
                    response = await run_in_threadpool(handler, ctx)
            except Forbidden as exc:
                response = ctx.render("web/error.html", status=exc.status, title="Not allowed", message=str(exc),
                                      problems=[])
            except InputError as exc:
                response = ctx.render("web/error.html", status=400, title="Please check", message=str(exc),
                                      problems=exc.problems)
            except MonitorError as exc:
                response = ctx.render("web/error.html", status=400, title="Could not do that", message=str(exc),
                                      problems=[])
            finally:
                if ctx.raw_form is not None:
                    await ctx.raw_form.close()
            if fresh or getattr(response, "_new_session", False):
                sid = getattr(response, "_new_session", None) or session.sid
                response.set_cookie(SESSION_COOKIE, sid, httponly=True, samesite="strict",
                                    secure=self.config.secure_cookies, path="/")
            self._headers(response)
            return response

        return endpoint

    async def _read_form(self, ctx: Ctx) -> None:
        length = int(ctx.request.headers.get("content-length") or 0)
        if length > MAX_UPLOAD_BYTES:
            raise Forbidden(f"That upload is larger than {MAX_UPLOAD_BYTES // (1024 * 1024)} MB.", 413)
        form = await ctx.request.form(max_files=4, max_fields=200)
        ctx.raw_form = form
        for key, value in form.multi_items():
            if isinstance(value, UploadFile):
                ctx.files[key] = value
            else:
                ctx.form[key] = value

    @staticmethod
    def _headers(response: Response) -> None:
        response.headers["Content-Security-Policy"] = CSP
        response.headers["X-Content-Type-Options"] = "nosniff"
        response.headers["Referrer-Policy"] = "no-referrer"
        response.headers["X-Frame-Options"] = "DENY"
        response.headers.setdefault("Cache-Control", "no-store")

    # --- rendering ----------------------------------------------------------------------------------------

    def render(self, ctx: Ctx, template: str, status: int = 200, **values: Any) -> HTMLResponse:
        flashes, ctx.session.flashes = ctx.session.flashes, []
        page = self.env.get_template(template).render(
            user=ctx.session.login, role=ctx.session.role, csrf=ctx.session.csrf, flashes=flashes,
            shared=self.config.shared, may=ctx.may, path=ctx.request.url.path, version=__version__, **values)
        return HTMLResponse(page, status_code=status)

    def cached(self, key: tuple, compute: Callable[[], Any]) -> Any:
        with self.cache_lock:
            if key in self.cache:
                return self.cache[key]
        value = compute()
        with self.cache_lock:
            self.cache[key] = value
        return value

    def forget(self) -> None:
        """Stored records changed: drop what was computed from them."""
        with self.cache_lock:
            self.cache.clear()

    # --- the application ----------------------------------------------------------------------------------

    def starlette(self) -> Starlette:
        w = self.wrap
        routes = [
            Route("/", w(pages.overview)),
            Route("/stations", w(pages.stations)),
            Route("/stations/{code}", w(pages.station)),
            Route("/season", w(pages.season)),
            Route("/season/plan", w(pages.season_plan, "recorder"), methods=["POST"]),
            Route("/season/packs", w(pages.season_packs), methods=["POST"]),
            Route("/season/{year:int}/packs.zip", w(pages.packs_zip)),
            Route("/records", w(pages.records)),
            Route("/records/upload", w(pages.records_upload, "recorder"), methods=["POST"]),
            Route("/records/check/{upload}", w(pages.records_check, "recorder")),
            Route("/records/import/{upload}", w(pages.records_import, "recorder"), methods=["POST"]),
            Route("/records/correct", w(pages.records_correct, "recorder"), methods=["POST"]),
            Route("/records/certify", w(pages.records_certify, "recorder"), methods=["POST"]),
            Route("/records/unlock", w(pages.records_unlock, "recorder"), methods=["POST"]),
            Route("/quality", w(pages.quality)),
            Route("/quality/check", w(pages.quality_check, "recorder"), methods=["POST"]),
            Route("/quality/resolve", w(pages.quality_resolve, "recorder"), methods=["POST"]),
            Route("/trends", w(pages.trends)),
            Route("/trends/report", w(pages.trends_report), methods=["POST"]),
            Route("/trends/{species}", w(pages.trend)),
            Route("/files/{area}/{path:path}", w(self.download)),
            Route("/signin", w(self.signin_page, None), methods=["GET", "POST"]),
            Route("/signout", w(self.signout, None), methods=["POST"]),
            Route("/open", w(self.open_with_token, None)),
            Mount("/static", app=StaticFiles(directory=str(Path(__file__).parent / "static")), name="static"),
        ]
        return Starlette(routes=routes)

    # --- downloads ----------------------------------------------------------------------------------------

    def download(self, ctx: Ctx) -> Response:
        area = ctx.request.path_params["area"]
        relative = ctx.request.path_params["path"]
        if area not in ("packs", "reports"):
            raise Forbidden("No such download.", 404)
        target = safe_file(self.config.workdir / area, relative)
        if target is None:
            raise Forbidden("No such file in the workspace's downloads.", 404)
        return FileResponse(target, filename=target.name, content_disposition_type="attachment")

    def zip_folder(self, folder: Path, name: str) -> Response:
        buffer = io.BytesIO()
        with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as archive:
            for path in sorted(folder.rglob("*")):
                if path.is_file() and not path.is_symlink():
                    archive.write(path, path.relative_to(folder).as_posix())
        return Response(buffer.getvalue(), media_type="application/zip",
                        headers={"Content-Disposition": f'attachment; filename="{name}"'})

    # --- who is there -------------------------------------------------------------------------------------

    def open_with_token(self, ctx: Ctx) -> Response:
        token = ctx.request.query_params.get("token", "")
        if self.config.shared or self.token_used or not same_token(token, self.config.open_token):
            raise Forbidden("This opening link is not valid (it works once). Restart `monitor serve` for a new one.",
                            401)
        self.token_used = True
        from monitor.services.common import current_user

        fresh = self.sessions.renew(ctx.session, current_user(), "owner")
        response = ctx.redirect("/")
        response._new_session = fresh.sid  # type: ignore[attr-defined]
        return response

    def signin_page(self, ctx: Ctx) -> Response:
        if not self.config.shared:
            raise Forbidden("This workspace has one user; open it with the link printed at start-up.", 404)
        if ctx.request.method == "GET":
            return ctx.render("web/signin.html", title="Sign in", message="")
        login = str(ctx.form.get("login", "")).strip()
        password = str(ctx.form.get("password", ""))
        address = ctx.request.client.host if ctx.request.client else "?"
        wait = self.limiter.wait(login, address)
        if wait > 0:
            return ctx.render("web/signin.html", status=429, title="Sign in",
                              message=f"Too many wrong passwords: try again in {int(wait) + 1} seconds.")
        role = web_users.check_password(self.config.db, login, password)
        if role is None:
            self.limiter.failed(login, address)
            return ctx.render("web/signin.html", status=401, title="Sign in",
                              message="That login and password do not match.")
        self.limiter.succeeded(login)
        fresh = self.sessions.renew(ctx.session, login, role)
        response = ctx.redirect("/")
        response._new_session = fresh.sid  # type: ignore[attr-defined]
        return response

    def signout(self, ctx: Ctx) -> Response:
        self.sessions.drop(ctx.session)
        response = ctx.redirect("/signin" if self.config.shared else "/")
        response.delete_cookie(SESSION_COOKIE, path="/")
        return response


def create_app(config: WebConfig, *, limiter: SignInLimiter | None = None) -> Starlette:
    app = WorkspaceApp(config, limiter)
    starlette = app.starlette()
    starlette.state.workspace = app
    return starlette


def one_time_token() -> str:
    return secrets.token_urlsafe(24)


def today() -> dt.date:
    return dt.date.today()
