"""The notebook app: :func:`explore` returns a displayable ipywidgets widget.

* :func:`explore` — build the app (optionally with initial inputs by name).
* :class:`ExplorerApp` — the widget (``.run()``, ``.dataset``, ``.pin()``, ``.size()`` ...).
* :mod:`explorer.app.inputs` — the input table, validation and :func:`inputs_to_call`, the pure
  mapping of the inputs onto the public API (``explorer.simulate``, or ``explorer.simulate_module``
  when more than one cell shares the plate's coolant).
* :mod:`explorer.app.widget` — the widget, and what its panels show as plain functions of the
  results: :func:`~explorer.app.widget.limits_html` (each limit "met", "NOT met" or "not
  evaluated (reason)" from ``Limits.check``, with the run's warnings beside every verdict),
  :func:`~explorer.app.widget.module_html`, :func:`~explorer.app.widget.sizing_html`.

In a notebook the app shows at once; its figures, the full input check (cell file, coolant) and
a warm-up of the model load behind it while the status line says so. The cell input lists the
bundled demo cells and the cell files in the working folder, takes any other path, and
``explore(cell=...)`` also takes a Cell object built in Python.

Live figures are plotly ``FigureWidget`` objects when the ``anywidget`` package is installed
(plotly >= 6 needs it for them); otherwise the app keeps plain figures, updates them in place and
redraws the ones on the open tab (see :mod:`explorer.app.live`).

>>> import explorer                       # doctest: +SKIP
>>> app = explorer.explore()              # doctest: +SKIP
>>> app                                   # doctest: +SKIP  (displays in a notebook)
"""

from explorer.app.inputs import FIELDS, defaults, inputs_to_call, load_inputs, save_inputs, validate

__all__ = [
    "ExplorerApp",
    "FIELDS",
    "defaults",
    "explore",
    "inputs_to_call",
    "load_inputs",
    "save_inputs",
    "validate",
]


def explore(**inputs):
    """Return the notebook app; keyword arguments set inputs by name (see ``FIELDS``).

    Examples
    --------
    >>> app = explore(cooling="edge_plate", flow_L_min=1.5)   # doctest: +SKIP
    >>> ds = app.run()                                       # doctest: +SKIP
    """
    from explorer.app.widget import ExplorerApp

    return ExplorerApp(**inputs)


def __getattr__(name):
    if name == "ExplorerApp":
        from explorer.app.widget import ExplorerApp

        return ExplorerApp
    raise AttributeError(f"module 'explorer.app' has no attribute {name!r}")
