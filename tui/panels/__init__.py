"""Self-contained workbench panels: speech intelligibility (STI), the channel layout with the
spatial and stage parameters, and treatment planning."""

from tui.panels.layout import ChannelLayoutPanel
from tui.panels.speech import SpeechPanel
from tui.panels.treatment import TreatmentPanel

__all__ = ["SpeechPanel", "ChannelLayoutPanel", "TreatmentPanel"]
