"""ASGI middleware around every request: security headers, HEAD for every GET, body size, and the last-resort
error reply that keeps the connection usable.

Pure ASGI classes (no BaseHTTPMiddleware), so nothing buffers a response or starts extra tasks.
"""

import json
import logging
import secrets
from collections.abc import Callable
from typing import Any

from starlette.responses import HTMLResponse, JSONResponse
from starlette.types import ASGIApp, Message, Receive, Scope, Send

log = logging.getLogger("pairline.server")

# Pages load scripts, styles and images from /static only; no inline script or style, no framing, no plugins.
CONTENT_SECURITY_POLICY = (
    "default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; font-src 'self'; "
    "connect-src 'self'; object-src 'none'; base-uri 'none'; form-action 'self'; frame-ancestors 'none'"
)
SECURITY_HEADERS: tuple[tuple[bytes, bytes], ...] = (
    (b"x-content-type-options", b"nosniff"),
    (b"content-security-policy", CONTENT_SECURITY_POLICY.encode("ascii")),
    (b"referrer-policy", b"no-referrer"),  # share links are secrets: never in a Referer
    (b"x-frame-options", b"DENY"),
    (b"cross-origin-opener-policy", b"same-origin"),
)


def _on_start(send: Send, change: Callable[[Message], None]) -> Send:
    """A send that lets `change` edit the response-start message (status and headers) before it goes out."""

    async def wrapped(message: Message) -> None:
        if message["type"] == "http.response.start":
            change(message)
        await send(message)

    return wrapped


class _HttpMiddleware:
    """Passes anything but HTTP (lifespan) straight through; subclasses handle HTTP requests."""

    def __init__(self, app: ASGIApp):
        self.app = app

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        await self.handle(scope, receive, send)

    async def handle(self, scope: Scope, receive: Receive, send: Send) -> None:
        raise NotImplementedError


class SecurityHeaders(_HttpMiddleware):
    """Adds SECURITY_HEADERS to every HTTP response, unless the response set one itself."""

    async def handle(self, scope: Scope, receive: Receive, send: Send) -> None:
        def add(message: Message) -> None:
            headers = list(message.get("headers", []))
            present = {name.lower() for name, _ in headers}
            headers += [(name, value) for name, value in SECURITY_HEADERS if name not in present]
            message["headers"] = headers

        await self.app(scope, receive, _on_start(send, add))


class HeadAsGet(_HttpMiddleware):
    """HEAD is answered for every GET route: the request runs as GET and the body is dropped (headers kept,
    Content-Length included). A 405 then lists HEAD beside GET."""

    async def handle(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["method"] != "HEAD":
            await self.app(scope, receive, send)
            return

        async def headers_only(message: Message) -> None:
            if message["type"] == "http.response.body":
                if message.get("more_body", False):
                    return
                message = {"type": "http.response.body", "body": b"", "more_body": False}
            await send(message)

        await self.app(dict(scope, method="GET"), receive, headers_only)


class ErrorGuard(_HttpMiddleware):
    """The last resort: an exception that escaped every handler is logged with its traceback and a request id,
    and answered with the error envelope (status 500), so the connection stays open for the next request.
    Nothing typed by a user should ever get here."""

    async def handle(self, scope: Scope, receive: Receive, send: Send) -> None:
        started = False

        async def tracking(message: Message) -> None:
            nonlocal started
            if message["type"] == "http.response.start":
                started = True
            await send(message)

        try:
            await self.app(scope, receive, tracking)
        except Exception:
            request_id = secrets.token_hex(6)
            log.exception("request %s failed: %s %s", request_id, scope.get("method"), scope.get("path"))
            if started:
                return  # the status line is out; the body simply ends here
            await send_error(send, 500, internal_error_body(request_id))


def internal_error_body(request_id: str) -> dict[str, Any]:
    return {
        "status": 500,
        "request_id": request_id,
        "problems": [
            {
                "field": "",
                "label": "Server",
                "value": None,
                "allowed": {},
                "message": f"Something went wrong on the server (request {request_id}); nothing you sent caused "
                "it. Try again, and mention the request id if it keeps happening.",
            }
        ],
    }


async def send_error(
    send: Send, status: int, body: dict[str, Any], headers: tuple[tuple[bytes, bytes], ...] = ()
) -> None:
    payload = json.dumps(body, ensure_ascii=False).encode("utf-8")
    await send(
        {
            "type": "http.response.start",
            "status": status,
            "headers": [
                (b"content-type", b"application/json"),
                (b"content-length", str(len(payload)).encode("ascii")),
                *headers,
            ],
        }
    )
    await send({"type": "http.response.body", "body": payload})


class BodyLimit(_HttpMiddleware):
    """Refuse request bodies over `max_bytes` with 413, by Content-Length or by counting a streamed body."""

    def __init__(self, app: ASGIApp, max_bytes: int):
        super().__init__(app)
        self.max_bytes = max_bytes

    async def handle(self, scope: Scope, receive: Receive, send: Send) -> None:
        headers = dict(scope.get("headers") or [])
        declared = headers.get(b"content-length")
        if declared is not None and (not declared.isdigit() or int(declared) > self.max_bytes):
            await _too_large(scope, receive, send, self.max_bytes)
            return
        seen = 0

        async def counting_receive() -> Message:
            nonlocal seen
            message = await receive()
            if message["type"] == "http.request":
                seen += len(message.get("body", b""))
                if seen > self.max_bytes:
                    raise BodyTooLarge
            return message

        try:
            await self.app(scope, counting_receive, send)
        except BodyTooLarge:
            await _too_large(scope, receive, send, self.max_bytes)


class BodyTooLarge(Exception):
    pass


async def _too_large(scope: Scope, receive: Receive, send: Send, max_bytes: int) -> None:
    message = f"The request is larger than {max_bytes // 1000} kB; send a smaller plan."
    body: dict[str, Any] = {
        "status": 413,
        "problems": [
            {
                "field": "",
                "label": "Request body",
                "value": None,
                "allowed": {"max_bytes": max_bytes},
                "message": message,
            }
        ],
    }
    path = str(scope.get("path", ""))
    accept = dict(scope.get("headers") or []).get(b"accept", b"").decode("latin-1")
    if "text/html" in accept and not (path.startswith("/api/") or path.endswith(".json")):
        html = (
            "<!doctype html><html lang='en'><head><meta charset='utf-8'><title>Too large · Pairline</title>"
            "<link rel='stylesheet' href='/static/pairline.css'></head><body><main><section class='panel lost'>"
            f"<h1>That is too much to send</h1><p>{message}</p>"
            "<p><a class='button' href='/'>Back to the start</a></p></section></main></body></html>"
        )
        await HTMLResponse(html, status_code=413)(scope, receive, send)
        return
    await JSONResponse(body, status_code=413)(scope, receive, send)
