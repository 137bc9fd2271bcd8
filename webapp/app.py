"""matdb's local page: navigation over one short script per page (webapp/views/; not named pages/, which Streamlit would also serve as its own automatic pages)."""

import streamlit as st

from webapp import _shared as sh

st.set_page_config(page_title="matdb: diamagnetic levitation", layout="wide")

PAGES = [
    st.Page("views/materials.py", title="Materials", default=True),
    st.Page("views/magnets.py", title="Magnets"),
    st.Page("views/design.py", title="Design"),
    st.Page("views/advisor.py", title="Advisor"),
    st.Page("views/lab_values.py", title="Lab values"),
]

sh.run_page(st.navigation(PAGES))  # one-line errors on the page, tracebacks to server stderr
