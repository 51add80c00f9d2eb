"""The workbench: a local web page over a workshop folder, for designing bars, following an
instrument and tuning at the bench with the microphone (``tonewright workbench``).

``create_app(folder)`` builds the ASGI application; the command serves it with uvicorn.
"""

from tonewright.workbench.app import MAX_UPLOAD_BYTES, create_app

__all__ = ["MAX_UPLOAD_BYTES", "create_app"]
