"""Edit > Project notes: free text kept in the project file (what was done and why)."""

from __future__ import annotations

from PySide6.QtWidgets import QDialog, QDialogButtonBox, QLabel, QPlainTextEdit, QVBoxLayout, QWidget

NOTES_HINT = ("Notes are saved in the project file: for example where the diary came from, "
              "why items were left out, or which model you settled on and why.")


class NotesDialog(QDialog):
    """A plain-text editor for the project notes; `text()` is the edited notes."""

    def __init__(self, notes: str, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("notesDialog")
        self.setWindowTitle("Project notes")
        self.resize(620, 440)
        layout = QVBoxLayout(self)
        hint = QLabel(NOTES_HINT)
        hint.setWordWrap(True)
        layout.addWidget(hint)
        self.editor = QPlainTextEdit(notes)
        self.editor.setAccessibleName("Project notes")
        layout.addWidget(self.editor, 1)
        self.buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok
                                        | QDialogButtonBox.StandardButton.Cancel)
        self.buttons.accepted.connect(self.accept)
        self.buttons.rejected.connect(self.reject)
        layout.addWidget(self.buttons)

    def text(self) -> str:
        return self.editor.toPlainText()
