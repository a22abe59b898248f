"""The browser workspace (``monitor serve``): pages over the same services as the command line.

Only this package imports the web framework (Starlette) and the server (uvicorn); it sits beside
``monitor.cli`` and calls ``monitor.services``."""
