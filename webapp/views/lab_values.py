"""Lab values: record a measured susceptibility with its source, see every value of a
material and which one the advisor and the design page use."""

import altair as alt
import pandas as pd
import streamlit as st

from matdb.reporting import presentation
from matdb.reporting import presentation as P
from matdb.analysis import dynamics as dyn_lab
from matdb.data import lab_store as lab
from matdb.errors import MatdbError
from webapp import _shared as sh

st.title("Lab values")
url = sh.db_url()
FORM_KEYS = ("lab_chi", "lab_chi_perp", "lab_chi_par", "lab_temperature", "lab_uncertainty", "lab_density",
             "lab_source", "lab_by", "lab_date", "lab_method", "lab_take_over")
# after a write: an empty form (no double entry) and choice boxes that follow the new state
# (values are set, not only forgotten: the browser keeps a widget's old text unless told)
resetting = st.session_state.pop("lab_reset", False)
if resetting:
    for k in FORM_KEYS + ("lab_retract_reason",):
        st.session_state[k] = True if k == "lab_take_over" else ""
    for k in ("lab_prefer_id", "lab_retract_id"):
        st.session_state.pop(k, None)
mats = sh.materials_table("si-volume", url)
ids = list(mats["id"])
names = dict(zip(mats["id"], mats["name"]))
mid = st.selectbox("Material", ids, index=ids.index("bismuth") if "bismuth" in ids else 0, key="lab_material",
                   format_func=lambda i: f"{names[i]} ({i})")

flash = st.session_state.pop("lab_flash", None)
if flash:
    st.success(sh.plain(flash))

# ---- history ------------------------------------------------------------------
try:
    hist = pd.DataFrame(lab.history(mid, url))
except MatdbError as exc:
    st.error(sh.plain(f"history: {exc}"))
    st.stop()
in_use = hist[hist["preferred"]]
if len(in_use):
    r = in_use.iloc[0]
    st.info(sh.plain(f"In use by the advisor and the design page: value {int(r['value_id'])} ({r['value_kind']}), "
                     f"chi = {P.fmt_chi(r['chi_si'])} (SI volume), from {r['source']}."))
st.subheader("Every value of this material")
pts = hist[["value_id", "value_kind", "chi_si", "uncertainty", "preferred", "retracted", "source"]].copy()
pts["label"] = [f"{int(v)} ({k})" for v, k in zip(pts["value_id"], pts["value_kind"])]
pts["uncertainty"] = pd.to_numeric(pts["uncertainty"], errors="coerce")
pts["lo"] = pts["chi_si"] - pts["uncertainty"].fillna(0.0)
pts["hi"] = pts["chi_si"] + pts["uncertainty"].fillna(0.0)
pts["status"] = ["in use" if p else "retracted" if r else "kept" for p, r in zip(pts["preferred"], pts["retracted"])]
pts["uncertainty_text"] = [P.fmt_chi(u) if u == u else "not stated" for u in pts["uncertainty"]]
def values_chart():
    """Every value of the material with its stated uncertainty, the one in use marked."""
    y_lo, y_hi = P.padded_domain(pts["lo"], pts["hi"])
    y_scale = alt.Scale(domain=[y_lo, y_hi], zero=False, nice=False)
    STATUS = ["in use", "kept", "retracted"]
    base = alt.Chart(pts).encode(x=alt.X("label:N", title="value (id and kind), oldest first", sort=list(pts["label"]),
                                         axis=alt.Axis(labelAngle=0)))
    with_unc = base.transform_filter("datum.hi > datum.lo")
    bars = with_unc.mark_rule(strokeWidth=2.5, color="#444444").encode(
        y=alt.Y("lo:Q", title="chi (SI volume, dimensionless)", scale=y_scale, axis=alt.Axis(format=".2e")), y2="hi:Q")
    caps_lo = with_unc.mark_tick(thickness=2.5, size=18, color="#444444").encode(y=alt.Y("lo:Q", scale=y_scale))
    caps_hi = with_unc.mark_tick(thickness=2.5, size=18, color="#444444").encode(y=alt.Y("hi:Q", scale=y_scale))
    dots = base.mark_point(filled=True, size=140, opacity=1).encode(
        y=alt.Y("chi_si:Q", scale=y_scale),
        color=alt.Color("status:N", title="status", scale=alt.Scale(domain=STATUS, range=["#1b7837", "#3d6fb6", "#999999"])),
        shape=alt.Shape("status:N", title="status", scale=alt.Scale(domain=STATUS, range=["diamond", "circle", "cross"])),
        tooltip=[alt.Tooltip("value_id:Q", title="value id"), alt.Tooltip("value_kind:N", title="kind"),
                 alt.Tooltip("chi_si:Q", title="chi (SI volume)", format=".3e"),
                 alt.Tooltip("uncertainty_text:N", title="uncertainty (SI volume)"), "status:N", "source:N"])
    return alt.layer(bars, caps_lo, caps_hi, dots).properties(
        height=260, title="Susceptibility values of this material with their stated uncertainty")


sh.chart(("lab values", sh.frame_key(pts)), values_chart, width="stretch")
st.caption("Bars with end caps: stated uncertainty (none drawn where the source states none). Diamond: the value in "
           "use; circles: kept; crosses: retracted. Nothing is ever deleted: retracted values stay.")
hist["chi_si_check"] = presentation.value_check_marks(hist.to_dict("records"))
cols = [c for c in ("value_id", "value_kind", "chi_si", "chi_si_check", "chi_par_si", "uncertainty", "temperature_c",
                    "source", "measured_by", "date", "method", "preferred", "retracted", "retract_reason")
        if c in hist.columns]
st.dataframe(hist[cols], hide_index=True, key="lab_history", column_config={
    **sh.check_column_config(["chi_si"]),
    "value_id": "value id",
    "value_kind": "value kind",
    "chi_si": st.column_config.NumberColumn("chi (SI volume, dimensionless)", format=P.CHI_PRINTF),
    "chi_par_si": st.column_config.NumberColumn("chi parallel (SI volume)", format=P.CHI_PRINTF),
    "uncertainty": st.column_config.NumberColumn("uncertainty (SI volume)", format=P.CHI_PRINTF),
    "temperature_c": st.column_config.NumberColumn("temperature (degC)", format="%.1f"),
    "preferred": "in use"})

# ---- record -------------------------------------------------------------------
st.subheader("Record a measured value")
anisotropic = bool(mats.set_index("id").loc[mid, "chi_par_si"] == mats.set_index("id").loc[mid, "chi_par_si"])
with st.form("lab_form", clear_on_submit=False):
    if anisotropic:
        a1, a2 = st.columns(2)
        chi_perp = a1.text_input("chi along the c axis (number = SI volume, or with a unit such as cgs-volume)",
                                 key="lab_chi_perp")
        chi_par = a2.text_input("chi in the basal plane", key="lab_chi_par")
        chi = ""
    else:
        chi = st.text_input("chi (a number is SI volume; or e.g. '-1.31e-5 cgs-volume', '-280e-6 cm^3/mol')",
                            key="lab_chi")
        chi_perp = chi_par = ""
    b1, b2, b3 = st.columns(3)
    temperature = b1.text_input("Temperature (optional; empty: not stated)", key="lab_temperature",
                                help="Type the sample temperature with its unit, e.g. 20 degC or 293 K. Left empty, "
                                     "the value is stored with no temperature.")
    uncertainty = b2.text_input("Uncertainty (optional; absolute or with %)", key="lab_uncertainty")
    density = b3.text_input("Density of your sample (optional)", key="lab_density",
                            help="With its unit, e.g. 9.78 g/cm^3. Left empty, the catalogue density is used.")
    source = st.text_input("Source note (required: where the number comes from)", key="lab_source")
    c1, c2, c3 = st.columns(3)
    measured_by = c1.text_input("Measured by", key="lab_by")
    date = c2.text_input("Date (YYYY-MM-DD)", key="lab_date")
    method = c3.text_input("Method", key="lab_method")
    if len(in_use):
        cur = in_use.iloc[0]
        take_over_label = (f"Use the new value from now on (it replaces value {int(cur['value_id'])}, "
                           f"chi = {P.fmt_chi(cur['chi_si'])}, in use now)")
    else:
        take_over_label = "Use the new value from now on"
    if "lab_take_over" not in st.session_state:
        st.session_state["lab_take_over"] = True
    take_over = st.checkbox(take_over_label, key="lab_take_over",
                            help="Untick to keep the value in use; the new value is recorded beside it either way.")
    submitted = st.form_submit_button("Record", key="lab_submit", type="primary")
if submitted:
    try:
        row = lab.record_material_value(
            mid, chi=chi or None, chi_perp=chi_perp or None, chi_par=chi_par or None, density=density or None,
            temperature=temperature or None, uncertainty=uncertainty or None, source=source,
            measured_by=measured_by or None, date=date or None, method=method or None, url=url)
    except MatdbError as exc:
        st.error(sh.plain(f"not recorded: {exc}"))
    else:
        kept_old = None
        try:
            if not take_over and len(in_use):
                kept_old = int(in_use.iloc[0]["value_id"])
                lab.prefer(mid, kept_old, url)
            elif take_over and not row.get("preferred"):
                lab.prefer(mid, row["value_id"], url)  # a value chosen earlier would otherwise stay in use
        except MatdbError as exc:
            st.error(sh.plain(f"recorded, but the choice of the value in use failed: {exc}"))
        sh.clear_catalog_caches()
        t = "temperature not stated" if not (temperature or "").strip() else f"at {temperature.strip()}"
        now = (f"value {kept_old} stays in use" if kept_old is not None
               else f"it is now in use for {mid}")
        st.session_state["lab_flash"] = (f"Recorded value {row['value_id']} for {mid}: chi = {P.fmt_chi(row['chi_si'])} "
                                         f"(SI volume), {t}; {now}.")
        st.session_state["lab_reset"] = True
        st.rerun()

# ---- prefer / retract ---------------------------------------------------------------
st.subheader("Choose the value in use, or retract a wrong one")
live = [int(v) for v, r in zip(hist["value_id"], hist["retracted"]) if not r]
p1, p2 = st.columns(2)
with p1:
    in_use_id = int(in_use.iloc[0]["value_id"]) if len(in_use) else None
    if (resetting or st.session_state.get("lab_prefer_id") not in live) and in_use_id in live:
        st.session_state["lab_prefer_id"] = in_use_id
    vid = st.selectbox("Value to use", live, key="lab_prefer_id",
                       format_func=lambda v: f"{v}" + (" (in use now)" if v == in_use_id else ""))
    if st.button("Use this value", key="lab_prefer"):
        try:
            lab.prefer(mid, vid, url)
        except MatdbError as exc:
            st.error(sh.plain(f"not changed: {exc}"))
        else:
            sh.clear_catalog_caches()
            st.session_state["lab_flash"] = f"Value {vid} is now in use for {mid}."
            st.session_state["lab_reset"] = True
            st.rerun()
with p2:
    measured = [int(v) for v, k, r in zip(hist["value_id"], hist["value_kind"], hist["retracted"])
                if k == "measured" and not r]
    if measured and (resetting or st.session_state.get("lab_retract_id") not in measured):
        st.session_state["lab_retract_id"] = measured[-1]
    rid = st.selectbox("Measured value to retract", measured, key="lab_retract_id")
    reason = st.text_input("Reason (required)", key="lab_retract_reason")
    if st.button("Retract", key="lab_retract", disabled=not measured):
        try:
            lab.retract(rid, reason, mid, url)
        except MatdbError as exc:
            st.error(sh.plain(f"not retracted: {exc}"))
        else:
            sh.clear_catalog_caches()
            st.session_state["lab_flash"] = f"Value {rid} retracted; it stays in the history."
            st.session_state["lab_reset"] = True
            st.rerun()

# ---- measured Q / ring-down -----------------------------------------------------
q_panel = st.expander("Measured quality factor or ring-down of a floating plate", key="lab_q_panel",
                      on_change="rerun")
if q_panel.open:  # built when opened
    with q_panel:
        qrows = dyn_lab.list_q_values(mid, url)
        if qrows:
            st.dataframe(qrows, hide_index=True, key="lab_q_table", column_config={
                "frequency_hz": st.column_config.NumberColumn("frequency (Hz)", format="%.4g"),
                "q": st.column_config.NumberColumn("Q", format="%.4g"),
                "ring_down_s": st.column_config.NumberColumn("ring-down (s)", format="%.4g"),
                "pressure_pa": st.column_config.NumberColumn("pressure (Pa)", format="%.3g"),
                "temperature_k": st.column_config.NumberColumn("temperature (K)", format="%.5g")})
        else:
            st.caption(sh.plain(f"No measured Q recorded for {mid} yet."))
        with st.form("lab_q_form", clear_on_submit=False):
            q1, q2, q3 = st.columns(3)
            q_val = q1.text_input("Q (a number)", key="lab_q")
            q_tau = q2.text_input("or ring-down time, 1/e of amplitude", key="lab_q_tau", placeholder="e.g. 25 s")
            q_f = q3.text_input("Mode frequency", key="lab_q_f", placeholder="e.g. 16 Hz")
            q4, q5, q6 = st.columns(3)
            q_p = q4.text_input("Pressure", key="lab_q_p", placeholder="e.g. 1e-3 Pa")
            q_mode = q5.text_input("Mode", key="lab_q_mode", placeholder="e.g. vertical")
            q_design = q6.text_input("Design or set-up", key="lab_q_design")
            q_source = st.text_input("Source note (required: where the number comes from)", key="lab_q_source")
            q_submit = st.form_submit_button("Record Q", key="lab_q_submit")
        if q_submit:
            try:
                qrow = dyn_lab.record_q_value(mid, q=q_val or None, ring_down=q_tau or None, frequency=q_f or None,
                                              pressure=q_p or None, mode=q_mode, design=q_design,
                                              source=q_source, url=url)
            except MatdbError as exc:
                st.error(sh.plain(f"not recorded: {exc}"))
            else:
                st.session_state["lab_flash"] = f"Recorded Q value {qrow['id']} for {mid}."
                st.rerun()
