"""When a folder has no rules: offer to look at the runs and propose rules (the core of `basinmark init`).

The proposal is shown in full and written to ``basins.proposed.toml``; the set is classified on it only
after the person presses Accept Rules (which makes it ``basins.toml``), so nothing is classified on rules
chosen by numbers without saying so.
"""

from __future__ import annotations

from PySide6.QtCore import Qt
from PySide6.QtGui import QFont
from PySide6.QtWidgets import (QApplication, QDialog, QDialogButtonBox, QLabel, QMessageBox, QPlainTextEdit,
                               QVBoxLayout)

from basinmark.core.errors import BasinmarkError


class ProposalDialog(QDialog):
    """What was found and proposed, with Accept Rules and Later."""

    def __init__(self, text: str, parent=None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Proposed rules")
        self.resize(900, 560)
        lay = QVBoxLayout(self)
        lay.addWidget(QLabel("basinmark looked at the runs and proposes the rules below (also written to "
                             "basins.proposed.toml, with a comment on how each number was chosen). Check them; "
                             "accept to classify the set with them, or edit the file first and accept later "
                             "(basinmark init FOLDER --accept).", self, wordWrap=True))
        self.text = QPlainTextEdit(text, self)
        self.text.setReadOnly(True)
        self.text.setFont(QFont("monospace"))
        lay.addWidget(self.text, 1)
        self.buttons = QDialogButtonBox(self)
        self.accept_button = self.buttons.addButton("Accept Rules", QDialogButtonBox.ButtonRole.AcceptRole)
        self.buttons.addButton("Later", QDialogButtonBox.ButtonRole.RejectRole)
        self.buttons.accepted.connect(self.accept)
        self.buttons.rejected.connect(self.reject)
        lay.addWidget(self.buttons)


class InitOffer:
    """The offer (a message box), then the proposal dialog; ``window`` is the MainWindow."""

    def __init__(self, window, tset) -> None:
        self.window, self.tset = window, tset
        self.dialog: ProposalDialog | None = None
        box = QMessageBox(window)
        box.setWindowTitle("No rules for this set")
        box.setText(f"{tset.root} has no rules file (basins.toml), so no run has an automatic outcome.")
        box.setInformativeText("basinmark can look at where the runs end and propose rules for you to check: "
                               "the distances that differ most between the ends, with thresholds from their "
                               "values. Nothing is classified on them until you accept them.")
        self.propose_button = box.addButton("Propose Rules…", QMessageBox.ButtonRole.AcceptRole)
        box.addButton("Not Now", QMessageBox.ButtonRole.RejectRole)
        box.accepted.connect(self.propose)
        box.buttonClicked.connect(lambda b: self.propose() if b is self.propose_button else None)
        self.box = box
        box.setWindowModality(Qt.WindowModality.NonModal)  # the runs stay usable while it is up
        box.show()

    def propose(self) -> None:
        from basinmark.core.init_files import report_text, write_files
        from basinmark.core.init_inspect import inspect_folder

        if self.dialog is not None:
            return
        QApplication.setOverrideCursor(Qt.CursorShape.WaitCursor)
        try:
            findings = inspect_folder(self.tset.root, tset=self.tset)
            written, kept = write_files(findings)
            text = report_text(findings, written) + "".join(f"Kept: {k}\n" for k in kept)
        except BasinmarkError as exc:
            self.window.set_notice("rules", f"No rules could be proposed: {exc}")
            return
        finally:
            QApplication.restoreOverrideCursor()
        self.dialog = ProposalDialog(text, self.window)
        self.dialog.accept_button.setEnabled(findings.proposal is not None and len(findings.proposal.basins) >= 2)
        self.dialog.accepted.connect(self.accept)
        self.dialog.open()

    def accept(self) -> None:
        from basinmark.core.init_files import accept_proposal

        try:
            path = accept_proposal(self.tset.root)
        except BasinmarkError as exc:
            self.window.set_notice("rules", f"The proposed rules were not accepted: {exc}")
            return
        self.window.statusBar().showMessage(f"Rules accepted: {path}", 8000)
        self.window.apply_rules(path)
