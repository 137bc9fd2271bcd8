"""Lab values page (filled in when matdb.labvalues lands)."""

import streamlit as st

from webapp import _shared as sh

st.title("Lab values")
if sh.module_or_none("matdb.labvalues") is None:
    sh.not_available("The Lab values page")
