"""Request guards that run before any view: the Host header and the body's media type.

Host (config ``ALLOWED_HOSTS``, names without port; ``"*"`` allows any): a request naming another
host is refused with 400, so a web page served from a name that resolves to this machine (DNS
rebinding) cannot reach the service through the visitor's browser. ``stressmap serve`` adds the
address it listens on.

Media type: a request with a body (POST) must say ``Content-Type: application/json`` (or a
``+json`` type such as ``application/geo+json``), or one of the types its view declares with
:func:`accepts` (file uploads); anything else is refused with 415 before the body is read.
Browsers send cross-site posts without a preflight only as ``text/plain``, form or multipart
types, so a page elsewhere cannot create models or start work here blind (a view that accepts
multipart uploads should require the token).
"""

from __future__ import annotations

from flask import current_app, request
from stressmap_api.problems import ApiProblem

__all__ = ["accepts", "host_allowed", "init_app"]


def accepts(*mimetypes: str):
    """Decorator for a view whose body is not JSON (a file upload): the media types it takes.

    Example: ``@accepts("application/x-netcdf", "application/octet-stream")``.
    """

    def mark(view):
        view.accepts = tuple(mimetypes)
        return view

    return mark


def host_allowed(host: str, allowed) -> bool:
    """Whether the Host header value ``host`` (name[:port]) names an allowed host.

    Examples
    --------
    >>> host_allowed("127.0.0.1:8000", ["localhost", "127.0.0.1"])
    True
    >>> host_allowed("[::1]:8000", ["::1"]), host_allowed("evil.example:80", ["localhost"])
    (True, False)
    >>> host_allowed("anything", ["*"])
    True
    """
    if isinstance(allowed, str):
        allowed = [a.strip() for a in allowed.split(",") if a.strip()]
    if "*" in allowed:
        return True
    host = (host or "").strip().lower()
    if host.startswith("["):  # [v6]:port
        name = host[1:].split("]", 1)[0]
    else:
        name = host.rsplit(":", 1)[0] if host.count(":") == 1 else host
    return name in {str(a).lower().strip("[]") for a in allowed}


def _check_host():
    allowed = current_app.config.get("ALLOWED_HOSTS")
    if allowed is None:
        return
    if not host_allowed(request.host, allowed):
        raise ApiProblem(400, "Host not served",
                         f"this service does not answer for host {request.host[:100]!r}; its "
                         "operator lists the served names in ALLOWED_HOSTS")
    return


def _check_media_type():
    if request.method not in ("POST", "PUT", "PATCH"):
        return
    mimetype = request.mimetype or ""
    if mimetype == "application/json" or mimetype.endswith("+json"):
        return
    view = current_app.view_functions.get(request.endpoint)
    if mimetype and mimetype in getattr(view, "accepts", ()):
        return  # a file upload of a type its view declares
    if not request.content_length and not mimetype:
        return  # no body at all: nothing to misread (a view that needs one says so)
    taken = getattr(view, "accepts", ())
    wanted = (f"one of {', '.join(taken)}" if taken
              else "JSON with 'Content-Type: application/json'")
    raise ApiProblem(415, "Unsupported Media Type",
                     f"send the body as {wanted} (got "
                     f"{(request.content_type or 'none')[:80]!r})",
                     headers={"Accept-Post": ", ".join(taken) or "application/json"})


def init_app(app) -> None:
    """Install both guards (before the token and the views)."""
    app.before_request(_check_host)
    app.before_request(_check_media_type)
