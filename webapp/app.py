"""matdb's local page: navigation over one short script per page (webapp/views/; not named pages/, which Streamlit would also serve as its own automatic pages)."""

import os

import streamlit as st

from webapp import _shared as sh

st.set_page_config(page_title="matdb: diamagnetic levitation", layout="wide")
# a headline number never ends in "...": it wraps before it would be cut, on any screen width
st.html("<style>[data-testid='stMetricValue'], [data-testid='stMetricValue'] * {white-space: normal !important; "
        "overflow-wrap: anywhere; text-overflow: clip !important;} [data-testid='stMetricValue'] "
        "{font-size: 1.9rem;}</style>")

PAGES = [
    st.Page("views/materials.py", title="Materials", default=True),
    st.Page("views/magnets.py", title="Magnets"),
    st.Page("views/design.py", title="Design"),
    st.Page("views/advisor.py", title="Advisor"),
    st.Page("views/lab_values.py", title="Lab values"),
]

sh.begin_run(sh.db_url())  # the catalogue's content key: tables recompute after any write, wherever made
if os.environ.get("MATDB_PAGE_WARM_UP", "1") != "0":  # MATDB_PAGE_WARM_UP=0: no background computing
    sh.warm_up_in_background(sh.db_url())
sh.run_page(st.navigation(PAGES))  # one-line errors on the page, tracebacks to server stderr
