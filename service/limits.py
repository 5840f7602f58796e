"""Request body size limit (413) as a plain ASGI middleware."""

from __future__ import annotations

import json

__all__ = ["BodySizeLimit"]


class BodySizeLimit:
    """Refuse request bodies larger than ``max_body_bytes`` with a 413.

    The declared ``Content-Length`` is checked before anything is read; a body sent
    without one (chunked) is counted as it arrives.
    """

    def __init__(self, app, max_body_bytes: int):
        self.app = app
        self.max_body_bytes = int(max_body_bytes)

    async def _reject(self, send, size_text: str) -> None:
        body = json.dumps({
            "error": "too_large",
            "detail": f"the request body is {size_text}; at most {self.max_body_bytes} bytes are "
            "accepted (split the data into several requests)",
        }).encode()
        await send({
            "type": "http.response.start",
            "status": 413,
            "headers": [(b"content-type", b"application/json"),
                        (b"content-length", str(len(body)).encode()),
                        (b"connection", b"close")],
        })
        await send({"type": "http.response.body", "body": body})

    async def __call__(self, scope, receive, send):
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        for name, value in scope.get("headers", ()):
            if name == b"content-length":
                try:
                    declared = int(value)
                except ValueError:
                    declared = -1
                if declared > self.max_body_bytes:
                    await self._reject(send, f"{declared} bytes")
                    return
                break
        received = 0
        too_large = False

        async def counting_receive():
            nonlocal received, too_large
            message = await receive()
            if message["type"] == "http.request":
                received += len(message.get("body", b""))
                if received > self.max_body_bytes:
                    too_large = True
                    raise _BodyTooLarge()
            return message

        started = False

        async def tracking_send(message):
            nonlocal started
            if too_large:
                # whatever the application made of the interrupted body (FastAPI answers
                # 400 "error parsing the body"), the client is told it was too large
                if message["type"] == "http.response.start" and not started:
                    started = True
                    await self._reject(send, f"more than {self.max_body_bytes} bytes")
                return
            if message["type"] == "http.response.start":
                started = True
            await send(message)

        try:
            await self.app(scope, counting_receive, tracking_send)
        except _BodyTooLarge:
            if not started:
                await self._reject(send, f"more than {self.max_body_bytes} bytes")


class _BodyTooLarge(Exception):
    pass
