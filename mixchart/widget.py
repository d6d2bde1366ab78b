"""A jupyter_bokeh widget that batches updates and applies browser edits once.

See :func:`BatchedBokehModel`.  Imported only by the app: it needs bokeh and
jupyter_bokeh.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

import numpy as np

__all__ = ["BatchedBokehModel"]


def _batched_model_class() -> type:
    from bokeh.core.serialization import Deserializer, Serialized, Serializer
    from bokeh.protocol.messages.patch_doc import PatchJson, patch_doc
    from jupyter_bokeh import BokehModel

    class _Batched(BokehModel):
        """A BokehModel that sends one message per batch and applies browser edits once.

        * ``with widget.batch(): ...`` collects the document changes made inside
          and sends them as one PATCH-DOC message instead of one per change,
          as three comm messages with the arrays inline (the stock widget sends
          two more comm messages per array).
        * jupyter_bokeh 4.1 runs a Python ``on_change`` callback twice for one
          browser edit (the property setter fires it, then a loop fires it
          again); here the setter alone fires it.
        """

        def __init__(self, model: Any, **kwargs: Any) -> None:
            self._held: list[Any] | None = None
            _guard_echo(model)
            super().__init__(model, **kwargs)

        @contextmanager
        def batch(self) -> Iterator[None]:
            if self._held is not None:
                yield
                return
            self._held = []
            try:
                yield
            finally:
                events, self._held = self._held, None
                if events:
                    self._send_events(events)

        def _document_patched(self, event: Any) -> None:
            if event.setter is self:
                return
            if self._held is not None:
                self._held.append(event)
            else:
                self._send_events([event])

        def _send_events(self, events: list[Any]) -> None:
            # One PATCH-DOC as three comm messages, arrays inline (base64) in the
            # content.  Protocol().create would put each array in a buffer of its
            # own, sent as two more comm messages (a refresh holds 30-100 arrays),
            # and in Voila every comm message costs more on its way to the page
            # than the base64 does (benchmarks/bench_app.py measures both).
            doc = events[0].document
            serializer = Serializer(references=doc.models.synced_references, deferred=False)
            content = PatchJson(events=serializer.encode(events))
            doc.models.flush_synced(lambda model: not serializer.has_ref(model))
            msg = patch_doc(patch_doc.create_header(), {}, content)
            for part in (msg.header_json, msg.metadata_json, msg.content_json):
                self.send({"msg": "patch", "payload": part})

        def _sync_model(self, _model: Any, content: dict[str, Any], _buffers: list[Any]) -> None:
            if content.get("event", "") != "jsevent":
                return
            event_data = dict(content)
            del event_data["event"]
            if self._document is None:
                return
            deserializer = Deserializer(list(self._document.models), setter=self)
            event = deserializer.deserialize(Serialized(content=event_data, buffers=[]))
            if event["kind"] == "ModelChanged":
                model, attr = event["model"], event["attr"]
                descriptor = model.lookup(attr)
                new = descriptor.property.prepare_value(model, descriptor.name, event["new"])
                old = descriptor._get(model)
                if _same_value(old, new):
                    return  # jupyter_bokeh echoes our own pushes back: nothing changed
                descriptor._set(model, old, new, setter=self)  # fires on_change callbacks once
                return
            super()._sync_model(_model, content, _buffers)

    return _Batched


#: Run in the page when the widget's Bokeh document is ready.  jupyter_bokeh 4.1's view holds back
#: the document changes made while it applies a patch from the kernel and then sends every one of
#: them back to the kernel, the kernel's own changes included (BokehJS marks those ``sync: false``;
#: its own server session drops them, the widget does not).  A plan change made each column the
#: kernel pushed travel back as gzip+base64: about 60 kB and 15 ms of the page's time per key press,
#: and as long again in the kernel to decode and discard.  This wraps the view's document listener
#: so that a change with ``sync === false`` is not sent; a change made in the page (a drag, a
#: CustomJS, BokehJS re-ranging an axis) still is.
ECHO_GUARD_JS = """
const doc = root.document;
if (doc == null || doc.__mixchart_echo_guard) { return; }
doc.__mixchart_echo_guard = true;
for (const [callback, batches] of [...doc._callbacks]) {
  if (!String(callback).includes('_change_event')) { continue; }  // only jupyter_bokeh's listener
  const guarded = (event) => { if (event.sync !== false) { callback(event); } };
  doc._callbacks.delete(callback);
  doc._callbacks.set(guarded, batches);
}
"""


def _guard_echo(model: Any) -> None:
    """Attach :data:`ECHO_GUARD_JS` to ``model``'s document (made here if it has none)."""
    from bokeh.document import Document
    from bokeh.events import DocumentReady
    from bokeh.models import CustomJS

    doc = model.document
    if doc is None:
        doc = Document()
        doc.add_root(model)
    doc.js_on_event(DocumentReady, CustomJS(args={"root": model}, code=ECHO_GUARD_JS))


def _same_value(old: Any, new: Any) -> bool:
    """Equality that understands column dicts of lists and numpy arrays."""
    if isinstance(old, dict) and isinstance(new, dict):
        if old.keys() != new.keys():
            return False
        return all(_same_value(old[k], new[k]) for k in old)
    if isinstance(old, (list, tuple, np.ndarray)) or isinstance(new, (list, tuple, np.ndarray)):
        try:
            a, b = np.asarray(old), np.asarray(new)
        except ValueError:  # ragged (e.g. patches' xs): compare item by item
            return len(old) == len(new) and all(_same_value(x, y) for x, y in zip(old, new, strict=True))
        if a.dtype == object or b.dtype == object:
            return len(old) == len(new) and all(_same_value(x, y) for x, y in zip(old, new, strict=True))
        return a.shape == b.shape and bool(np.array_equal(a, b))
    try:
        return bool(old == new)
    except Exception:
        return False


_BATCHED: type | None = None


def BatchedBokehModel(model: Any) -> Any:
    """Wrap a Bokeh layout as an ipywidget that batches updates (see ``_batched_model_class``)."""
    global _BATCHED
    if _BATCHED is None:
        _BATCHED = _batched_model_class()
    return _BATCHED(model)
