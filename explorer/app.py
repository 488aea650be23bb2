"""``panel serve explorer/app.py [--args FILE [SESSION]]``: the explorer as a Panel app script.

The data folder (see :func:`explorer.serve.create_app`) is the folder ``panel serve`` was started in.
"""

import sys

import panel as pn

from explorer.serve import create_app, data_folder

if pn.state.served:  # only under `panel serve` (importing this module builds nothing)
    _args = [a for a in sys.argv[1:] if not a.startswith("-")]
    create_app(file=_args[0] if _args else None, session=_args[1] if len(_args) > 1 else None,
               data_root=data_folder()).servable(title="sigtune explorer")
