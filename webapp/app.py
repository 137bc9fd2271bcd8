"""matdb's local page: navigation over one short script per page (webapp/pages/)."""

import streamlit as st

st.set_page_config(page_title="matdb: diamagnetic levitation", layout="wide")

PAGES = [
    st.Page("pages/materials.py", title="Materials", default=True),
    st.Page("pages/magnets.py", title="Magnets"),
    st.Page("pages/design.py", title="Design"),
    st.Page("pages/advisor.py", title="Advisor"),
    st.Page("pages/lab_values.py", title="Lab values"),
]

st.navigation(PAGES).run()
