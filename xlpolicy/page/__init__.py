"""The owner's page: a local web page where a workbook is dropped and its policy shown.

``xlpolicy open`` starts it (see :func:`xlpolicy.page.server.serve`); docs/page.md tells an
owner how to use it and how it is kept private. The page calls :func:`xlpolicy.api.plan`,
so every check, limit and message is the command line's.

Modules: ``app`` (routes and the checks on every request), ``jobs`` (uploads, their private
folders and runs), ``results`` (what of a report the page shows), ``reorder_pdf`` (the
printable list, by LibreOffice), ``server`` (uvicorn on the loopback address), and the
page itself in ``static/`` (HTML, CSS and a script; nothing loaded from elsewhere).
"""

from __future__ import annotations

__all__ = ["create_app", "serve"]


def __getattr__(name: str) -> object:
    # lazily: the web framework is imported only when the page is used
    if name == "create_app":
        from .app import create_app

        return create_app
    if name == "serve":
        from .server import serve

        return serve
    raise AttributeError(name)
