from fleet.forms import DateInput, EntryForm

from .models import GaugeZeroCheck


class GaugeZeroCheckForm(EntryForm):
    class Meta:
        model = GaugeZeroCheck
        fields = ["checked_on", "zero_offset_dbar", "note"]
        widgets = {"checked_on": DateInput()}
