"""Entry point for production WSGI servers: ``waitress-serve --call dashboard.wsgi:create_server``.

The plant description comes from the environment variable ``BELTWAVE_CONFIG``.
"""
from __future__ import annotations

import os

from optimizer.config import load_plant

from .app import create_app
from .data import open_reader


def create_server():
    path = os.environ.get("BELTWAVE_CONFIG")
    if not path:
        raise RuntimeError("set BELTWAVE_CONFIG to the plant description (TOML) before starting the server")
    plant, _ = load_plant(path)
    return create_app(plant, open_reader(plant)).server
