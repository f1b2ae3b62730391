"""The caution every report, export and figure carries."""
CAUTION = ("Model- and prior-dependent results. They support the responsible observatory's "
           "assessment and never replace it or official warnings.")
