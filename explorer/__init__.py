"""sigtune's explorer: a locally served, notebook-style dashboard over the :mod:`dsp` library.

Modules
    state      BenchState: every setting (param, no Panel), sessions in and out
    stages     the pipeline and its per-stage caches (keyed on dataset id + settings)
    runner     worker threads, generation counter, progressive delivery
    decimate   display reduction of long traces (tsdownsample)
    views/     thin HoloViews viewers fed by streams (time, spectrum, response, motion, alias)
    controls   widgets bound to the state, with message lines beside the settings
    page       the page of cards; exports: files in and out
    serve      ``sigtune serve``, ``create_app`` (servable, notebook), ``app.py`` for ``panel serve``
"""
