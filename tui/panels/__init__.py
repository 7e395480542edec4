"""Self-contained workbench panels: speech intelligibility (STI), the channel layout with the
spatial and stage parameters, and treatment planning.

Mounting them (a few lines in the tab that holds them)::

    yield SpeechPanel(id="speech")            # Analyze tab
    yield ChannelLayoutPanel(id="layout")     # Analyze tab
    yield TreatmentPanel(id="treatment")      # Room tab

    # before analysing (conditions() raises InputError, already shown in the panel):
    kw = {"sti": speech.conditions(), **layout.analysis_kwargs()}
    res = analyze_study(files, **kw)
    # after it:
    speech.show(res.study.document); layout.show(res.study.document)
    treatment.set_results(res.study.document)         # or an analysis JSON path
    treatment.set_room(dims_m=(10.0, 7.0, 3.0))       # or volume_m3=..., area_m2=...
"""

from tui.panels.layout import ChannelLayoutPanel
from tui.panels.speech import SpeechPanel
from tui.panels.treatment import TreatmentPanel

__all__ = ["SpeechPanel", "ChannelLayoutPanel", "TreatmentPanel"]
