"""The Project-menu forms: the review packet form starts where the command line does."""

from __future__ import annotations

from app.cli import build_parser
from app.ui.dialogs import PacketDialog


def test_the_packet_form_and_the_command_line_send_the_same_images_by_default(qtbot, tmp_path):
    """Issue item 15: one default for packet images, heads blurred (the safer choice for
    frames of people; our own rule)."""
    dialog = PacketDialog(tmp_path, {"untouched": 3}, None)
    qtbot.addWidget(dialog)
    sub = next(a for a in build_parser()._actions if a.dest == "command").choices
    packet = next(a for a in sub["packet"]._actions if a.dest == "packet_command").choices
    cli_default = packet["export"].get_default("images")
    assert dialog.images.currentData() == cli_default == "blurred-heads"
