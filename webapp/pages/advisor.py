"""Advisor page (filled in when matdb.advisor lands)."""

import streamlit as st

from webapp import _shared as sh

st.title("Advisor")
if sh.module_or_none("matdb.advisor") is None:
    sh.not_available("The Advisor page")
