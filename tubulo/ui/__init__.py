"""The terminal workbench (`tubulo ui [CASE]`).

The pure parts (form catalogue, workup editing, evaluation, files, graph browsing, nephron drawing)
import no Textual; `tubulo.ui.app` holds the Textual application and is imported only by the
`ui` command, so the rest of the CLI stays fast.
"""

__all__: list[str] = []
