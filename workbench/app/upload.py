"""The scenario file input: the browser checks a file's size before sending a byte of it.

Panel's file input reads the whole file in the browser and sends it in one websocket message; a file larger
than the server's message limit closes the connection and the session with it, silently. This input sends
the file only when it is at most ``max_bytes`` (:data:`workbench.app.serve.BROWSER_UPLOAD_LIMIT`, which
the server's message limit holds with room to spare); for a larger file it sends only its name and size,
so the session can say why it was refused. The session then checks what arrived
(:meth:`workbench.app.state.ScenarioState.upload`: size, emptiness, text, TOML) and answers each case with
its own one-line message. After every choice the input is cleared, so choosing the same file again (or the
same bytes under a new name) is a new upload.

Examples
--------
>>> received = []
>>> upload = UploadInput(on_file=lambda content, name: received.append((content, name)))
>>> upload.receive({"kind": "file", "name": "a.toml", "size": 3, "data": "YT0x"})
>>> received
[(b'a=1', 'a.toml')]
"""

from __future__ import annotations

import base64
import binascii
from collections.abc import Callable

import param
from panel.custom import JSComponent

from workbench.app.serve import BROWSER_UPLOAD_LIMIT

__all__ = ["UploadInput"]


class UploadInput(JSComponent):
    """A file input that refuses, in the browser, files over ``max_bytes`` and reports them by name and size.

    ``on_file(content, filename)`` receives an accepted file's bytes; ``on_refused(filename, size)`` a
    refused file's name and size.
    """

    accept = param.String(default=".toml", doc="The file types the chooser offers.")
    max_bytes = param.Integer(default=BROWSER_UPLOAD_LIMIT, doc="Largest file sent to the server.")

    def __init__(
        self,
        on_file: Callable[[bytes | None, str], object] | None = None,
        on_refused: Callable[[str, int], object] | None = None,
        **params,
    ):
        super().__init__(**params)
        # plain attributes, not parameters: every parameter of the component is sent to the page
        self.on_file, self.on_refused = on_file, on_refused

    _esm = """
export function render({ model, el }) {
  const input = document.createElement('input');
  input.type = 'file';
  input.accept = model.accept;
  input.style.fontSize = '12px';
  input.style.maxWidth = '100%';
  input.addEventListener('change', () => {
    const file = input.files && input.files[0];
    if (!file) return;
    if (file.size > model.max_bytes) {
      model.send_msg({kind: 'refused', name: file.name, size: file.size});
      input.value = '';
      return;
    }
    const reader = new FileReader();
    reader.onload = () => {
      const url = String(reader.result || '');
      model.send_msg({kind: 'file', name: file.name, size: file.size, data: url.slice(url.indexOf(',') + 1)});
      input.value = '';
    };
    reader.onerror = () => {
      model.send_msg({kind: 'unreadable', name: file.name, size: file.size});
      input.value = '';
    };
    reader.readAsDataURL(file);
  });
  model.on('accept', () => { input.accept = model.accept; });
  el.appendChild(input);
}
"""

    def _handle_msg(self, data) -> None:
        self.receive(data)

    def receive(self, data) -> None:
        """Hand a message of the page's input to ``on_file`` or ``on_refused`` (anything else is ignored)."""
        if not isinstance(data, dict):
            return
        name = str(data.get("name") or "")[:255]
        size = data.get("size") if isinstance(data.get("size"), int) else -1
        kind = data.get("kind")
        if kind == "file" and self.on_file is not None:
            self.on_file(_decoded(data.get("data")), name)
        elif kind == "unreadable" and self.on_file is not None:
            self.on_file(None, name)  # the browser could not read it: "no file received"
        elif kind == "refused" and self.on_refused is not None:
            self.on_refused(name, size)


def _decoded(data) -> bytes | None:
    """The bytes of a base64 text, or None when it is not one.

    Examples
    --------
    >>> _decoded("YQ=="), _decoded(""), _decoded("%%"), _decoded(None)
    (b'a', b'', None, None)
    """
    if not isinstance(data, str):
        return None
    try:
        return base64.b64decode(data, validate=True)
    except (binascii.Error, ValueError):
        return None
