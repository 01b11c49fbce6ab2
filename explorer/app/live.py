"""Live plotly figures for the app: created once, then updated in place.

With ``anywidget`` installed (plotly >= 6 needs it for ``go.FigureWidget``) each figure is a
``FigureWidget`` whose changes reach the browser as small updates. Without it the same
``go.Figure`` object is kept and updated in place and re-drawn into an ``ipywidgets.Output``;
the app behaves the same, only the redraw is heavier.
"""

from __future__ import annotations

import logging
from pathlib import Path

import ipywidgets as widgets
import numpy as np
import plotly.graph_objects as go

logger = logging.getLogger(__name__)

__all__ = ["LiveFigure", "figure_widgets_available", "shared_figure_widget"]

# plotly's FigureWidget (an anywidget) ships its browser code, plotly.js included (~5 MB), with
# every widget; each copy is a separate module in the page. The app's figures use a small module
# instead that asks the kernel once per page for that code and shares one copy between them.
_BUNDLE_REQUEST = "pte-plotly-bundle?"
_BUNDLE_REPLY = "pte-plotly-bundle"
_SHIM = """
const KEY = "__pteExplorerPlotlyWidget";
function load(model) {
  if (!globalThis[KEY]) {
    globalThis[KEY] = new Promise((resolve, reject) => {
      const fail = (error) => { globalThis[KEY] = undefined; reject(error); };
      const timer = setTimeout(() => fail(new Error("explorer: the figure code did not arrive "
                                                    + "from the kernel")), 120000);
      const on = (msg, buffers) => {
        if (!msg || msg.type !== "__REPLY__") return;
        clearTimeout(timer);
        model.off("msg:custom", on);
        const url = URL.createObjectURL(new Blob([buffers[0]], {type: "text/javascript"}));
        import(url).then(resolve, fail);
      };
      model.on("msg:custom", on);
      model.send({type: "__REQUEST__"});
    });
  }
  return globalThis[KEY];
}
export default () => {
  let ready = null;
  return {
    initialize(ctx) {
      ready = load(ctx.model).then((mod) => { const inner = mod.default(); inner.initialize(ctx);
                                               return inner; });
    },
    async render(ctx) { const inner = await ready; return inner.render(ctx); },
  };
};
""".replace("__REPLY__", _BUNDLE_REPLY).replace("__REQUEST__", _BUNDLE_REQUEST)

_SHARED_CLASS = None


def shared_figure_widget():
    """The ``go.FigureWidget`` subclass whose browser code is loaded once per page (see _SHIM)."""
    global _SHARED_CLASS
    if _SHARED_CLASS is None:
        from plotly import basewidget

        esm = basewidget.BaseFigureWidget.__dict__.get("_esm")
        path = Path(str(getattr(esm, "_path", esm)))
        if not path.is_file():  # another plotly packaging: keep its own widget
            _SHARED_CLASS = go.FigureWidget
            return _SHARED_CLASS

        class ExplorerFigureWidget(go.FigureWidget):
            _esm = _SHIM

            def __init__(self, *args, **kwargs):
                super().__init__(*args, **kwargs)
                self.on_msg(_send_bundle)

        ExplorerFigureWidget._bundle_path = path
        _SHARED_CLASS = ExplorerFigureWidget
    return _SHARED_CLASS


_BUNDLE: bytes | None = None


def _send_bundle(widget, content, buffers) -> None:
    global _BUNDLE
    if not isinstance(content, dict) or content.get("type") != _BUNDLE_REQUEST:
        return
    if _BUNDLE is None:
        _BUNDLE = Path(type(widget)._bundle_path).read_bytes()
    widget.send({"type": _BUNDLE_REPLY}, buffers=[_BUNDLE])


def figure_widgets_available() -> bool:
    """Whether plotly's ``FigureWidget`` can be created here (needs the ``anywidget`` package)."""
    try:
        go.FigureWidget()
    except ImportError:
        return False
    return True


_HAS_FIGURE_WIDGET: bool | None = None


def _has_figure_widget() -> bool:
    global _HAS_FIGURE_WIDGET
    if _HAS_FIGURE_WIDGET is None:
        _HAS_FIGURE_WIDGET = figure_widgets_available()
        if not _HAS_FIGURE_WIDGET:
            logger.info("plotly FigureWidget needs the `anywidget` package (pip install anywidget); "
                        "the app redraws plain figures instead")
    return _HAS_FIGURE_WIDGET


def _in_kernel() -> bool:
    try:
        from IPython import get_ipython
    except ImportError:  # pragma: no cover
        return False
    shell = get_ipython()
    return shell is not None and getattr(shell, "kernel", None) is not None


class LiveFigure:
    """One figure of the app, kept for its lifetime and updated in place.

    Attributes
    ----------
    figure : plotly.graph_objects.FigureWidget or Figure
        The live figure object (the same object for the app's lifetime).
    widget : ipywidgets.Widget
        What to place in the layout (the FigureWidget itself, or an Output holding the figure).
    updates : int
        How many updates were applied (used by the benchmark and the tests).
    """

    def __init__(self, placeholder: str = "Run to see results", height: int = 420):
        base = go.Figure(layout=dict(
            template="simple_white", height=height,
            annotations=[dict(text=placeholder, showarrow=False, x=0.5, y=0.5,
                              xref="paper", yref="paper", font=dict(size=16, color="#777"))],
            xaxis=dict(visible=False), yaxis=dict(visible=False)))
        self.native = _has_figure_widget()
        if self.native:
            self.figure = shared_figure_widget()(base)
            self.widget = self.figure
        else:
            self.figure = base
            self.widget = widgets.Output(layout=widgets.Layout(min_height=f"{height}px"))
        self.updates = 0
        self.empty = True
        self.visible = True  # the app clears it for figures on hidden tabs
        self._stale = False

    def replace(self, source: go.Figure) -> None:
        """Make the live figure show ``source`` (data and layout), reusing traces where it can.

        When the traces line up (same count and types) only the properties that changed are
        assigned, which keeps both the Python-side validation and the messages to the browser
        small; otherwise the traces are swapped.
        """
        fig = self.figure
        same = (len(fig.data) == len(source.data)
                and all(a.type == b.type for a, b in zip(fig.data, source.data)))
        new_layout = source.layout.to_plotly_json()
        old_layout = fig.layout.to_plotly_json()
        if same:
            with fig.batch_update():
                for target, new in zip(fig.data, source.data):
                    _assign_changed(target, target.to_plotly_json(), new.to_plotly_json())
                _assign_changed(fig.layout, old_layout, new_layout)
        else:
            fig.data = ()
            fig.add_traces(list(source.data))
            fig.layout = source.layout
        self.empty = False
        self.refresh()

    def show(self, visible: bool) -> None:
        """Mark the figure shown or hidden; a hidden plain figure is redrawn when shown again."""
        self.visible = visible
        if visible and self._stale:
            self._stale = False
            self._draw()

    def refresh(self) -> None:
        """After in-place changes: count them and, without FigureWidget, redraw the figure.

        A plain figure on a hidden tab is only marked stale (redrawn by :meth:`show`), so a time
        slider move costs one redraw per visible figure.
        """
        self.updates += 1
        if self.native or not _in_kernel():
            return
        if not self.visible:
            self._stale = True
            return
        self._draw()

    def _draw(self) -> None:
        # set the Output's content directly: unlike `with output: display(...)` this also works
        # from the app's background run thread. The bundle comes from plotly's active renderers;
        # when they give none, the plotly mimetype that JupyterLab and VS Code draw natively.
        data = self.figure._repr_mimebundle_(None, None) or {}
        if not data:
            import json

            import plotly.io as pio

            data = {"application/vnd.plotly.v1+json": json.loads(pio.to_json(self.figure,
                                                                             validate=False)),
                    "text/plain": repr(self.figure)[:200]}
        self.widget.outputs = ({"output_type": "display_data", "data": data, "metadata": {}},)


def _differs(a, b) -> bool:
    if a is b:
        return False
    if isinstance(a, np.ndarray | list | tuple) or isinstance(b, np.ndarray | list | tuple):
        try:
            x, y = np.asarray(a), np.asarray(b)
            if x.dtype.kind in "biuf" and y.dtype.kind in "biuf":
                return x.shape != y.shape or not np.array_equal(x, y, equal_nan=True)
        except (ValueError, TypeError):
            pass
    try:
        return bool(a != b)
    except (ValueError, TypeError):
        return True


def _assign_changed(obj, old: dict, new: dict) -> None:
    """Assign to ``obj`` the top-level properties of ``new`` that differ from ``old``; reset the rest."""
    for key, value in new.items():
        if key == "type":
            continue
        if key not in old or _differs(old[key], value):
            obj[key] = value
    for key in old:
        if key not in new and key != "type":
            obj[key] = None
