"""Design page (filled in when matdb.levitate lands)."""

import streamlit as st

from webapp import _shared as sh

st.title("Design")
if sh.module_or_none("matdb.levitate") is None:
    sh.not_available("The Design page")
