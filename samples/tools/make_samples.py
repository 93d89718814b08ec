#!/usr/bin/env python3
"""Writes the demo lab's well-formed neutral documents (samples/lab/) from the
session descriptions below, as XML or JSON. Invented data only: Kestrel Vale
Hospital and its patients, devices and makers do not exist.

The hand-written files (samples/examples/, samples/lab/bad-schema-*) are not
made here. Run from the repository root: python3 samples/tools/make_samples.py
"""
import copy
import json
import math
import os
from xml.sax.saxutils import escape, quoteattr

NS = "https://pftgw.example/ns/result"
OUT = os.path.join(os.path.dirname(__file__), "..", "lab")
MRN = "https://kestrelvale.example/fhir/identifier/mrn"
LABNO = "urn:oid:2.999.7.20.1"  # 2.999: the OID arc reserved for examples

PATIENTS = {
    "ilvesson": dict(identifiers=[dict(system=MRN, value="KV100231", type="MR"),
                                  dict(system=LABNO, value="LF-0412", type="PI")],
                     name=dict(family="Ilvesson", given="Marta"), sexAtBirth="female",
                     administrativeGender="female", birthDate="1958-04-11",
                     height=dict(kind="HEIGHT", value=164, unit="cm"),
                     weight=dict(kind="WEIGHT", value=61.5, unit="kg")),
    "brennigan": dict(identifiers=[dict(system=MRN, value="KV100477", type="MR")],
                      name=dict(family="Brennigan", given="Tomasz"), sexAtBirth="male",
                      administrativeGender="male", birthDate="1971-09-23",
                      height=dict(kind="HEIGHT", value=181, unit="cm"),
                      weight=dict(kind="WEIGHT", value=88, unit="kg")),
    "castellow": dict(identifiers=[dict(system=MRN, value="KV100812", type="MR")],
                      name=dict(family="Castellow", given="Aiyana"), sexAtBirth="female",
                      administrativeGender="female", birthDate="1989-01-30",
                      height=dict(kind="HEIGHT", value=1.70, unit="m"),
                      weight=dict(kind="WEIGHT", value=66, unit="kg"), ethnicity="Other/mixed"),
    "delacorte": dict(identifiers=[dict(system=MRN, value="KV101005", type="MR")],
                      name=dict(family="Delacorte-Hale", given="Rufus"), sexAtBirth="male",
                      administrativeGender="male", birthDate="1949-12-05",
                      height=dict(kind="HEIGHT", value=175, unit="cm"),
                      weight=dict(kind="WEIGHT", value=79, unit="kg")),
    "andersby": dict(identifiers=[dict(system=MRN, value="KV101266", type="MR")],
                     name=dict(family="Andersby", given="Priya"), sexAtBirth="female",
                     administrativeGender="female", birthDate="1977-06-17",
                     height=dict(kind="HEIGHT", value=158, unit="cm"),
                     weight=dict(kind="WEIGHT", value=72, unit="kg")),
    "mbeki": dict(identifiers=[dict(system=MRN, value="KV101390", type="MR")],
                  name=dict(family="Mbeki-Lund", given="Oskar"), sexAtBirth="male",
                  administrativeGender="male", birthDate="1995-03-08",
                  height=dict(kind="HEIGHT", value=188, unit="cm"),
                  weight=dict(kind="WEIGHT", value=83, unit="kg")),
    "quist": dict(identifiers=[dict(system=MRN, value="KV101544", type="MR")],
                  name=dict(family="Quist", given="Hedda"), sexAtBirth="female",
                  administrativeGender="female", birthDate="1966-10-02",
                  height=dict(kind="HEIGHT", value=167, unit="cm"),
                  weight=dict(kind="WEIGHT", value=58, unit="kg")),
    "ainsley": dict(identifiers=[dict(system=MRN, value="KV101718", type="MR")],
                    name=dict(family="Ainsley", given="Fergus"), sexAtBirth="male",
                    administrativeGender="male", birthDate="1983-07-29",
                    height=dict(kind="HEIGHT", value=176, unit="cm"),
                    weight=dict(kind="WEIGHT", value=91, unit="kg")),
}

DEVICES = {
    "SPX3": dict(id="SPX3", manufacturer="Aldercrest Instruments", model="FlowQuill 3",
                 serial="AQ3-20417", software="2.8.0", lastCalibration="2026-03-02T07:40:00+01:00",
                 calibrationNote="3 L syringe check, 0.6 % error"),
    "BOX2": dict(id="BOX2", manufacturer="Quillon Medical Works", model="Plethora B2",
                 serial="QMW-B2-0093", software="11.4", lastCalibration="2026-03-02T07:55:00+01:00"),
    "DLX1": dict(id="DLX1", manufacturer="Tarnhollow Diagnostics", model="TransferLine DX",
                 serial="TD-7781", software="5.0.3"),
    "DLX2": dict(id="DLX2", manufacturer="Brightmere Labware", model="Diffusa 5",
                 serial="BML-D5-1204", software="1.9.12",
                 lastCalibration="2026-03-09T07:30:00+01:00"),
}


def q(kind, value, unit, condition=None, ref=None, trials=None, code=None, system=None, **extra):
    out = dict(kind=kind, value=value, unit=unit)
    if condition:
        out["condition"] = condition
    if code:
        src = dict(value=repr_num(value), unit=unit)
        if condition:
            src["condition"] = condition
        src["code"] = code
        src["codeSystem"] = system
        out["source"] = src
    if ref:
        # Devices send predicted values in litres at BTPS even when they report
        # the measured volume in mL at ATPS: the reference names its own unit.
        if unit == "mL" and ref.get("predicted", 0) < 50:
            ref = dict(ref, unit="L")
        out["reference"] = [ref]
    if trials:
        out["trials"] = trials
    out.update(extra)
    return out


def ref(eq, pred=None, lln=None, uln=None, z=None, pct=None, version=None):
    out = dict(equationSet=eq)
    if version:
        out["equationVersion"] = version
    out["origin"] = "device"
    for k, v in (("predicted", pred), ("lln", lln), ("uln", uln), ("z", z),
                 ("percentPredicted", pct)):
        if v is not None:
            out[k] = v
    return out


def repr_num(v):
    return str(v) if isinstance(v, int) else repr(v)


def env(t=22.0, pb=101.2, pb_unit="kPa", t_unit="Cel", rh=None):
    out = dict(temperature=dict(kind="AMB_TEMP", value=t, unit=t_unit),
               pressure=dict(kind="PB", value=pb, unit=pb_unit))
    if rh is not None:
        out["humidity"] = dict(kind="RH", value=rh, unit="%")
    return out


def doc(id_, session_no, time, patient, device, tests, environment=None, order=None,
        revision=1, status="final", replaces=None, extensions=None, schema="1.0"):
    d = dict(schemaVersion=schema, id=id_, revision=revision, status=status)
    if replaces:
        d["replaces"] = replaces
    d["deviceSessionNumber"] = session_no
    d["sessionTime"] = time
    d["subject"] = copy.deepcopy(PATIENTS[patient]) if isinstance(patient, str) else patient
    if order:
        d["order"] = order
    d["device"] = DEVICES[device]
    if environment:
        d["environment"] = environment
    d["tests"] = tests
    if extensions:
        d["extensions"] = extensions
    return d


# ---- JSON -> XML, following the layout in DEVELOPERS.md "The open schema" ----

def attrs(d, names):
    return "".join(f" {xml}={quoteattr(repr_num(d[js]) if not isinstance(d[js], str) else d[js])}"
                   for js, xml in names if js in d and not isinstance(d[js], bool)) + \
        "".join(f' {xml}="{str(d[js]).lower()}"' for js, xml in names
                if js in d and isinstance(d[js], bool))


QATTRS = [("kind", "kind"), ("value", "value"), ("unit", "unit"), ("condition", "condition"),
          ("origin", "origin"), ("absent", "absent")]


def quantity_xml(tag, qd, ind):
    kids = []
    if "source" in qd:
        kids.append(f"<source{attrs(qd['source'], [('value','value'),('unit','unit'),('condition','condition'),('code','code'),('codeSystem','codeSystem')])}/>")
    for r in qd.get("reference", []):
        kids.append(f"<reference{attrs(r, [('equationSet','equationSet'),('equationVersion','equationVersion'),('origin','origin'),('unit','unit'),('predicted','predicted'),('lln','lln'),('uln','uln'),('z','z'),('percentPredicted','percentPredicted')])}/>")
    for t in qd.get("trials", []):
        kids.append(f'<trialRef number="{t}"/>')
    for k in qd.get("derivedFrom", []):
        kids.append(f'<derivedFrom kind="{k}"/>')
    for c in qd.get("comments", []):  # schema 1.2: comments on this value alone
        kids.append(f"<comment>{escape(c)}</comment>")
    head = f"{ind}<{tag}{attrs(qd, QATTRS)}"
    if not kids:
        return head + "/>\n"
    return head + ">\n" + "".join(f"{ind}  {k}\n" for k in kids) + f"{ind}</{tag}>\n"


def to_xml(d):
    o = [f'<?xml version="1.0" encoding="UTF-8"?>\n<result xmlns="{NS}"'
         + attrs(d, [("schemaVersion", "schemaVersion"), ("id", "id"), ("revision", "revision"),
                     ("status", "status"), ("replaces", "replaces")]) + ">\n"]
    o.append(f"  <deviceSessionNumber>{escape(d['deviceSessionNumber'])}</deviceSessionNumber>\n")
    o.append(f"  <sessionTime>{d['sessionTime']}</sessionTime>\n")
    s = d["subject"]
    o.append("  <subject>\n")
    for i in s.get("identifiers", []):
        o.append(f"    <identifier{attrs(i, [('system','system'),('value','value'),('type','type')])}/>\n")
    if "name" in s:
        o.append(f"    <name{attrs(s['name'], [('family','family'),('given','given')])}/>\n")
    for k in ("sexAtBirth", "administrativeGender", "birthDate"):
        if k in s:
            o.append(f"    <{k}>{escape(s[k])}</{k}>\n")
    for k in ("height", "weight"):
        if k in s:
            o.append(quantity_xml(k, s[k], "    "))
    if "ethnicity" in s:
        o.append(f"    <ethnicity>{escape(s['ethnicity'])}</ethnicity>\n")
    o.append("  </subject>\n")
    if "order" in d:
        o.append(f"  <order{attrs(d['order'], [('placer','placer'),('filler','filler'),('accession','accession')])}/>\n")
    o.append(f"  <device{attrs(d['device'], [(k, k) for k in ('id','manufacturer','model','serial','software','lastCalibration','calibrationNote')])}/>\n")
    if "environment" in d:
        o.append("  <environment>\n")
        for k in ("temperature", "pressure", "humidity"):
            if k in d["environment"]:
                o.append(quantity_xml(k, d["environment"][k], "    "))
        o.append("  </environment>\n")
    for t in d["tests"]:
        o.append(f"  <test{attrs(t, [('type','type'),('method','method'),('time','time')])}>\n")
        for v in t.get("values", []):
            o.append(quantity_xml("value", v, "    "))
        for tr in t.get("trials", []):
            o.append(f"    <trial{attrs(tr, [('number','number'),('time','time'),('operatorAccepted','operatorAccepted'),('tracer','tracer')])}>\n")
            for v in tr.get("values", []):
                o.append(quantity_xml("value", v, "      "))
            o.append("    </trial>\n")
        for c in t.get("comments", []):
            o.append(f"    <comment>{escape(c)}</comment>\n")
        o.append("  </test>\n")
    if "extensions" in d:
        o.append("  <extensions>\n")
        for n, e in enumerate(d["extensions"]):
            p = f"x{n}"
            o.append(f'    <{p}:{e["name"]} xmlns:{p}={quoteattr(e["namespace"])}>\n')
            for prop in e.get("properties", []):
                o.append(f"      <{p}:{prop['name']}>{escape(prop['value'])}</{p}:{prop['name']}>\n")
            o.append(f"    </{p}:{e['name']}>\n")
        o.append("  </extensions>\n")
    o.append("</result>\n")
    return "".join(o)


def write(name, d):
    path = os.path.join(OUT, name)
    with open(path, "w", encoding="utf-8") as f:
        if name.endswith(".json"):
            f.write(json.dumps(d, indent=2, ensure_ascii=False) + "\n")
        else:
            f.write(to_xml(d))


GLI12 = "GLI-2012"
GLI22 = "GLI Global 2022"
GLI17 = "GLI-2017"
GLI21 = "GLI-2021"
AQ = "Aldercrest FlowQuill"
QMW = "Quillon Plethora"

# ---- the sessions ----

def spiro_trials_ml(base_fev1_ml, base_fvc_ml, times, cond="ATPS"):
    out = []
    for n, (df1, dfv, t, ok) in enumerate(times, start=1):
        out.append(dict(number=n, time=t, operatorAccepted=ok, values=[
            q("FEV1", base_fev1_ml + df1, "mL", cond),
            q("FVC", base_fvc_ml + dfv, "mL", cond)]))
    return out


SESSIONS = []

# 1. Spirometry, SPX3, ATPS in mL with ambient values and device codes.
SESSIONS.append(("2026-03-02-ilvesson-spirometry.xml", doc(
    "KVH-SPX3-004711", "004711", "2026-03-02T08:50:00+01:00", "ilvesson", "SPX3",
    environment=env(22.5, 101.2, rh=38),
    order=dict(placer="ORD-55120", filler="LF-26-0311", accession="ACC-26-01877"),
    tests=[dict(type="spirometry", time="2026-03-02T08:54:10+01:00", values=[
        q("FEV1", 2010, "mL", "ATPS", ref(GLI12, 2.27, 1.73, 2.81, -0.84, 97), [2], "F1", AQ),
        q("FVC", 2650, "mL", "ATPS", ref(GLI12, 2.93, 2.27, 3.59, -0.7, 99), [2], "FVC", AQ),
        q("FEV1_FVC", 75.8, "%", "none", ref(GLI12, 77.9, 66.4, 88.6, -0.31, 97), code="F1FVC", system=AQ),
        q("PEF", 355, "L/min", "ATPS", code="PEF", system=AQ),
        q("FEF25_75", 1470, "mL/s", "ATPS", code="F2575", system=AQ),
        q("FET", 7.9, "s", "none", code="FET", system=AQ)],
        trials=spiro_trials_ml(2010, 2650, [(-60, -40, "2026-03-02T08:52:30+01:00", True),
                                             (0, 0, "2026-03-02T08:53:40+01:00", True),
                                             (-30, -70, "2026-03-02T08:54:10+01:00", True)]),
        comments=["3 acceptable maneuvers, grade A (FEV1 and FVC)"])])))

# 2. Spirometry, SPX3, ATPS in L, pressure in mm[Hg].
SESSIONS.append(("2026-03-02-brennigan-spirometry.json", doc(
    "KVH-SPX3-004712", "004712", "2026-03-02T09:20:00+01:00", "brennigan", "SPX3",
    environment=env(21.8, 758.0, pb_unit="mm[Hg]"),
    order=dict(placer="ORD-55133"),
    tests=[dict(type="spirometry", time="2026-03-02T09:24:00+01:00", values=[
        q("FEV1", 3.52, "L", "ATPS", ref(GLI12, 3.95, 3.11, 4.79, -0.98, 97), [1]),
        q("FVC", 4.55, "L", "ATPS", ref(GLI12, 5.01, 3.99, 6.03, -0.72, 99), [3]),
        q("FEV1_FVC", 0.774, "1", "none", ref(GLI12, 0.79, 0.68, 0.89, -0.24)),
        q("PEF", 9.1, "L/s", "ATPS"),
        q("FEF25_75", 3.3, "L/s", "ATPS"),
        q("FEF75", 1.12, "L/s", "ATPS"),
        q("FET", 9.4, "s", "none")],
        comments=["Pre-bronchodilator only; patient declined salbutamol"])])))

# 3. Spirometry, BOX2, BTPS in L, GLI Global 2022; schema 1.2 for the
#    comments on single values (PEF, trial 3's FEV1).
SESSIONS.append(("2026-03-03-castellow-spirometry.xml", doc(
    "KVH-BOX2-3301", "3301", "2026-03-03T10:05:00+01:00", "castellow", "BOX2", schema="1.2",
    tests=[dict(type="spirometry", time="2026-03-03T10:08:00+01:00", values=[
        q("FEV1", 3.41, "L", "BTPS", ref(GLI22, 3.28, 2.62, 3.94, 0.33, 104), [1]),
        q("FVC", 4.02, "L", "BTPS", ref(GLI22, 3.86, 3.11, 4.61, 0.35, 104), [1]),
        q("FEV1_FVC", 0.848, "1", "none", ref(GLI22, 0.85, 0.75, 0.95, -0.02, 100)),
        q("PEF", 7.35, "L/s", "BTPS", comments=["Peak reached late on trial 2; PEF from trial 1"]),
        q("FEF25_75", 3.6, "L/s", "BTPS"),
        q("FET", 6.8, "s", "none")],
        trials=[dict(number=1, time="2026-03-03T10:06:00+01:00", operatorAccepted=True,
                     values=[q("FEV1", 3.41, "L", "BTPS"), q("FVC", 4.02, "L", "BTPS")]),
                dict(number=2, time="2026-03-03T10:07:00+01:00", operatorAccepted=True,
                     values=[q("FEV1", 3.36, "L", "BTPS"), q("FVC", 3.98, "L", "BTPS")]),
                dict(number=3, time="2026-03-03T10:08:00+01:00", operatorAccepted=False,
                     values=[q("FEV1", 3.05, "L", "BTPS", comments=["Cough at 0.6 s"]),
                             q("FVC", 3.7, "L", "BTPS")])],
        comments=["Trial 3 rejected: cough in first second"])])))

# 4. Spirometry, obstructive, with a comment full of HL7 delimiters, on the
#    test and (schema 1.2) on FEV1 alone.
SESSIONS.append(("2026-03-03-delacorte-spirometry.json", doc(
    "KVH-BOX2-3302", "3302", "2026-03-03T11:00:00+01:00", "delacorte", "BOX2", schema="1.2",
    order=dict(placer="ORD-55201", accession="ACC-26-01920"),
    tests=[dict(type="spirometry", time="2026-03-03T11:04:00+01:00", values=[
        q("FEV1", 1.48, "L", "BTPS", ref(GLI12, 2.78, 2.04, 3.52, -2.92, 53), [2],
          comments=["z < -2.5 | repeat ^ after & bronchodilator ~ next visit"]),
        q("FVC", 2.85, "L", "BTPS", ref(GLI12, 3.71, 2.79, 4.63, -1.55, 77), [1]),
        q("FEV1_FVC", 0.519, "1", "none", ref(GLI12, 0.73, 0.6, 0.85, -3.1, 71)),
        q("PEF", 4.2, "L/s", "BTPS"),
        q("FEF25_75", 0.62, "L/s", "BTPS"),
        q("FEF75", 0.21, "L/s", "BTPS"),
        q("FET", 13.6, "s", "none")],
        comments=["Obstruction | moderate ^ severe? GOLD 2 & FEV1/FVC < LLN ~ see prior \\\\KV\\archive",
                  "Technician: R. Ostrander"])])))

# 5. Lung volumes, plethysmography, BTPS in L (hyperinflation).
SESSIONS.append(("2026-03-03-delacorte-lung-volumes.xml", doc(
    "KVH-BOX2-3303", "3303", "2026-03-03T11:20:00+01:00", "delacorte", "BOX2",
    tests=[dict(type="lung-volumes", method="body-plethysmography", time="2026-03-03T11:26:00+01:00", values=[
        q("TLC", 7.95, "L", "BTPS", ref(GLI21, 6.7, 5.5, 7.9, 1.71, 119)),
        q("VC", 3.05, "L", "BTPS", ref(GLI21, 3.9, 2.95, 4.85, -1.45, 78)),
        q("RV", 4.9, "L", "BTPS", ref(GLI21, 2.7, 1.95, 3.45, 3.05, 181)),
        q("FRC", 5.6, "L", "BTPS", ref(GLI21, 3.6, 2.6, 4.6, 2.1, 156)),
        q("ERV", 0.7, "L", "BTPS"),
        q("IC", 2.35, "L", "BTPS"),
        q("RV_TLC", 0.616, "1", "none", ref(GLI21, 0.41, 0.32, 0.5, 3.3))],
        comments=["FRCpleth mean of 3 within 5 %"])])))

# 6. Lung volumes in mL, BTPS.
SESSIONS.append(("2026-03-04-andersby-lung-volumes.json", doc(
    "KVH-BOX2-3320", "3320", "2026-03-04T09:10:00+01:00", "andersby", "BOX2",
    tests=[dict(type="lung-volumes", method="body-plethysmography", time="2026-03-04T09:15:30+01:00", values=[
        q("TLC", 4610, "mL", "BTPS", ref(GLI21, 4.85, 3.95, 5.75, -0.44, 95)),
        q("VC", 3020, "mL", "BTPS"),
        q("RV", 1590, "mL", "BTPS", ref(GLI21, 1.72, 1.2, 2.24, -0.4, 92)),
        q("FRC", 2480, "mL", "BTPS"),
        q("ERV", 890, "mL", "BTPS"),
        q("IC", 2130, "mL", "BTPS"),
        q("RV_TLC", 34.5, "%", "none")])])))

# 7. Lung volumes by nitrogen washout, no RV_TLC sent.
SESSIONS.append(("2026-03-04-mbeki-lung-volumes.xml", doc(
    "KVH-BOX2-3321", "3321", "2026-03-04T10:30:00+01:00", "mbeki", "BOX2",
    tests=[dict(type="lung-volumes", method="nitrogen-washout", time="2026-03-04T10:41:00+01:00", values=[
        q("TLC", 7.62, "L", "BTPS", ref(GLI21, 7.55, 6.35, 8.75, 0.1, 101)),
        q("VC", 5.88, "L", "BTPS"),
        q("RV", 1.74, "L", "BTPS"),
        q("FRC", 3.71, "L", "BTPS"),
        q("ERV", 1.97, "L", "BTPS"),
        q("IC", 3.91, "L", "BTPS")],
        comments=["Washout repeated twice, FRC within 10 %"])])))

# 8. DLCO, DLX1, traditional units, Hb g/dL.
SESSIONS.append(("2026-03-05-ilvesson-dlco.xml", doc(
    "KVH-DLX1-88120", "88120", "2026-03-05T09:00:00+01:00", "ilvesson", "DLX1",
    environment=env(22.0, 755.0, pb_unit="mm[Hg]"),
    tests=[dict(type="diffusing-capacity", method="single-breath", time="2026-03-05T09:12:00+01:00", values=[
        q("DLCO", 18.6, "mL/min/mm[Hg]", "STPD", ref(GLI17, 20.9, 15.6, 26.2, -0.72, 89), [1, 2], "TLCO_SB", "Tarnhollow TL"),
        q("VA", 4.35, "L", "BTPS", ref(GLI17, 4.7, 3.8, 5.6, -0.6, 93), [1, 2]),
        q("KCO", 4.28, "mL/min/mm[Hg]/L", "none", ref(GLI17, 4.45, 3.55, 5.35, -0.3, 96)),
        q("VI", 2.6, "L", "BTPS"),
        q("BHT", 10.3, "s", "none"),
        q("HB", 12.8, "g/dL", "none"),
        q("COHB", 1.4, "%", "none")],
        trials=[dict(number=1, time="2026-03-05T09:05:00+01:00", operatorAccepted=True, values=[
                    q("DLCO", 18.9, "mL/min/mm[Hg]", "STPD"), q("VA", 4.38, "L", "BTPS"),
                    q("VI", 2.62, "L", "BTPS"), q("BHT", 10.1, "s", "none")]),
                dict(number=2, time="2026-03-05T09:12:00+01:00", operatorAccepted=True, values=[
                    q("DLCO", 18.3, "mL/min/mm[Hg]", "STPD"), q("VA", 4.32, "L", "BTPS"),
                    q("VI", 2.58, "L", "BTPS"), q("BHT", 10.5, "s", "none")])],
        comments=["Reported DLCO is the mean of trials 1 and 2 (within 2 mL/min/mmHg)"])])))

# 9. DLCO, DLX2, SI units, Hb g/L, with trials.
SESSIONS.append(("2026-03-09-brennigan-dlco.json", doc(
    "KVH-DLX2-D0451", "D0451", "2026-03-09T13:40:00+01:00", "brennigan", "DLX2",
    order=dict(placer="ORD-55610", filler="LF-26-0402"),
    tests=[dict(type="diffusing-capacity", method="single-breath", time="2026-03-09T13:52:00+01:00", values=[
        q("DLCO", 9.12, "mmol/min/kPa", "STPD", ref(GLI17, 10.05, 7.9, 12.2, -0.71, 91), [1, 3]),
        q("VA", 6.45, "L", "BTPS", ref(GLI17, 6.6, 5.55, 7.65, -0.23, 98)),
        q("KCO", 1.41, "mmol/min/kPa/L", "none", ref(GLI17, 1.52, 1.19, 1.85, -0.55, 93)),
        q("VI", 4.38, "L", "BTPS"),
        q("BHT", 9.8, "s", "none"),
        q("HB", 151, "g/L", "none")],
        trials=[dict(number=1, time="2026-03-09T13:44:00+01:00", operatorAccepted=True, values=[
                    q("DLCO", 9.2, "mmol/min/kPa", "STPD"), q("VA", 6.48, "L", "BTPS")]),
                dict(number=2, time="2026-03-09T13:48:00+01:00", operatorAccepted=False, values=[
                    q("DLCO", 8.1, "mmol/min/kPa", "STPD"), q("VA", 5.9, "L", "BTPS")]),
                dict(number=3, time="2026-03-09T13:52:00+01:00", operatorAccepted=True, values=[
                    q("DLCO", 9.04, "mmol/min/kPa", "STPD"), q("VA", 6.42, "L", "BTPS")])],
        comments=["Trial 2: breath-hold 6.9 s, excluded"])])))

# 10. DLCO, DLX2, SI, Hb g/L.
SESSIONS.append(("2026-03-09-quist-dlco.xml", doc(
    "KVH-DLX2-D0452", "D0452", "2026-03-09T14:30:00+01:00", "quist", "DLX2",
    tests=[dict(type="diffusing-capacity", method="single-breath", time="2026-03-09T14:41:00+01:00", values=[
        q("DLCO", 6.21, "mmol/min/kPa", "STPD", ref(GLI17, 7.35, 5.7, 9.0, -1.13, 84)),
        q("VA", 4.72, "L", "BTPS"),
        q("KCO", 1.32, "mmol/min/kPa/L", "none"),
        q("VI", 3.05, "L", "BTPS"),
        q("BHT", 10.9, "s", "none"),
        q("HB", 128, "g/L", "none"),
        q("COHB", 2.1, "%", "none")])])))

# 11. DLCO, DLX1, traditional, Hb g/dL.
SESSIONS.append(("2026-03-10-castellow-dlco.json", doc(
    "KVH-DLX1-88131", "88131", "2026-03-10T08:30:00+01:00", "castellow", "DLX1",
    tests=[dict(type="diffusing-capacity", method="single-breath", time="2026-03-10T08:39:00+01:00", values=[
        q("DLCO", 26.4, "mL/min/mm[Hg]", "STPD", ref(GLI17, 24.8, 19.3, 30.3, 0.45, 106)),
        q("VA", 5.3, "L", "BTPS"),
        q("KCO", 4.98, "mL/min/mm[Hg]/L", "none"),
        q("VI", 3.7, "L", "BTPS"),
        q("BHT", 9.6, "s", "none"),
        q("HB", 13.9, "g/dL", "none")])])))

def full_session(id_, no, t0, patient, comments, values_scale=1.0):
    return None


# 12. Combined session on BOX2: spirometry + lung volumes + DLCO, with trials.
SESSIONS.append(("2026-03-11-ainsley-full-pft.xml", doc(
    "KVH-BOX2-3390", "3390", "2026-03-11T09:00:00+01:00", "ainsley", "BOX2",
    environment=env(23.1, 99.8, rh=45),
    order=dict(placer="ORD-55702", filler="LF-26-0455", accession="ACC-26-02210"),
    tests=[
        dict(type="spirometry", time="2026-03-11T09:06:00+01:00", values=[
            q("FEV1", 3.62, "L", "BTPS", ref(GLI12, 3.8, 3.02, 4.58, -0.39, 95), [2]),
            q("FVC", 4.71, "L", "BTPS", ref(GLI12, 4.78, 3.85, 5.71, -0.13, 99), [2]),
            q("FEV1_FVC", 0.769, "1", "none", ref(GLI12, 0.8, 0.7, 0.89, -0.5)),
            q("PEF", 9.4, "L/s", "BTPS"),
            q("FEF25_75", 3.2, "L/s", "BTPS"),
            q("FEF75", 1.05, "L/s", "BTPS"),
            q("FET", 8.8, "s", "none")],
            trials=[dict(number=1, operatorAccepted=True, values=[q("FEV1", 3.55, "L", "BTPS"), q("FVC", 4.66, "L", "BTPS")]),
                    dict(number=2, operatorAccepted=True, values=[q("FEV1", 3.62, "L", "BTPS"), q("FVC", 4.71, "L", "BTPS")]),
                    dict(number=3, operatorAccepted=True, values=[q("FEV1", 3.58, "L", "BTPS"), q("FVC", 4.6, "L", "BTPS")])]),
        dict(type="lung-volumes", method="body-plethysmography", time="2026-03-11T09:25:00+01:00", values=[
            q("TLC", 6.55, "L", "BTPS", ref(GLI21, 6.7, 5.6, 7.8, -0.2, 98)),
            q("VC", 4.78, "L", "BTPS"),
            q("RV", 1.77, "L", "BTPS"),
            q("FRC", 3.1, "L", "BTPS"),
            q("ERV", 1.33, "L", "BTPS"),
            q("IC", 3.45, "L", "BTPS"),
            q("RV_TLC", 0.27, "1", "none")]),
        dict(type="diffusing-capacity", method="single-breath", time="2026-03-11T09:48:00+01:00", values=[
            q("DLCO", 9.6, "mmol/min/kPa", "STPD", ref(GLI17, 10.2, 8.05, 12.35, -0.44, 94)),
            q("VA", 6.2, "L", "BTPS"),
            q("KCO", 1.55, "mmol/min/kPa/L", "none"),
            q("VI", 4.5, "L", "BTPS"),
            q("VI_VC", 0.94, "1", "none"),
            q("BHT", 10.0, "s", "none"),
            q("HB", 14.9, "g/dL", "none")],
            comments=["Hb from ward sample 2026-03-10 & entered by hand"])])))

# 13. Combined session, JSON, traditional DLCO and Hb g/L.
SESSIONS.append(("2026-03-11-andersby-full-pft.json", doc(
    "KVH-BOX2-3391", "3391", "2026-03-11T10:30:00+01:00", "andersby", "BOX2",
    tests=[
        dict(type="spirometry", time="2026-03-11T10:34:00+01:00", values=[
            q("FEV1", 2.48, "L", "BTPS", ref(GLI22, 2.63, 2.05, 3.21, -0.43, 94), [1]),
            q("FVC", 3.05, "L", "BTPS", ref(GLI22, 3.2, 2.5, 3.9, -0.35, 95), [1]),
            q("FEV1_FVC", 0.813, "1", "none"),
            q("PEF", 6.2, "L/s", "BTPS"),
            q("FET", 7.1, "s", "none")],
            trials=[dict(number=1, operatorAccepted=True, values=[q("FEV1", 2.48, "L", "BTPS"), q("FVC", 3.05, "L", "BTPS")]),
                    dict(number=2, operatorAccepted=True, values=[q("FEV1", 2.41, "L", "BTPS"), q("FVC", 2.99, "L", "BTPS")])]),
        dict(type="lung-volumes", method="body-plethysmography", time="2026-03-11T10:50:00+01:00", values=[
            q("TLC", 4.7, "L", "BTPS"), q("VC", 3.08, "L", "BTPS"), q("RV", 1.62, "L", "BTPS"),
            q("FRC", 2.55, "L", "BTPS")]),
        dict(type="diffusing-capacity", method="single-breath", time="2026-03-11T11:05:00+01:00", values=[
            q("DLCO", 21.3, "mL/min/mm[Hg]", "STPD", ref(GLI17, 22.6, 17.6, 27.6, -0.4, 94)),
            q("VA", 4.4, "L", "BTPS"),
            q("KCO", 4.84, "mL/min/mm[Hg]/L", "none"),
            q("VI", 2.95, "L", "BTPS"),
            q("BHT", 10.4, "s", "none"),
            q("HB", 131, "g/L", "none")])])))

# 14 and 15. A correction: revision 1, then revision 2 (status corrected).
rev1 = doc("KVH-DLX2-D0460", "D0460", "2026-03-12T09:15:00+01:00", "mbeki", "DLX2",
           tests=[dict(type="diffusing-capacity", method="single-breath", time="2026-03-12T09:24:00+01:00", values=[
               q("DLCO", 10.4, "mmol/min/kPa", "STPD", ref(GLI17, 11.9, 9.45, 14.35, -0.95, 87)),
               q("VA", 7.05, "L", "BTPS"),
               q("KCO", 1.48, "mmol/min/kPa/L", "none"),
               q("VI", 5.6, "L", "BTPS"),
               q("BHT", 10.2, "s", "none"),
               q("HB", 135, "g/L", "none")])])
SESSIONS.append(("2026-03-12-mbeki-dlco-rev1.xml", rev1))
rev2 = copy.deepcopy(rev1)
rev2["revision"] = 2
rev2["status"] = "corrected"
rev2["tests"][0]["values"][5] = q("HB", 153, "g/L", "none")
rev2["tests"][0]["comments"] = ["Revision 2: Hb corrected from 135 to 153 g/L (transcription error)"]
SESSIONS.append(("2026-03-12-mbeki-dlco-rev2.xml", rev2))

# 16. Spirometry at ATPS with temperature in [degF] and pressure in hPa.
SESSIONS.append(("2026-03-12-quist-spirometry.json", doc(
    "KVH-SPX3-004790", "004790", "2026-03-12T14:05:00+01:00", "quist", "SPX3",
    environment=env(71.6, 1009.0, pb_unit="hPa", t_unit="[degF]", rh=41),
    tests=[dict(type="spirometry", time="2026-03-12T14:09:00+01:00", values=[
        q("FEV1", 2.31, "L", "ATPS", ref(GLI12, 2.6, 2.0, 3.2, -0.8, 89)),
        q("FVC", 3.12, "L", "ATPS", ref(GLI12, 3.3, 2.6, 4.0, -0.43, 95)),
        q("FEV1_FVC", 0.74, "1", "none"),
        q("PEF", 5.9, "L/s", "ATPS"),
        q("FET", 9.0, "s", "none")])])))

# 17. Spirometry + DLCO on DLX1 (combined), trials for both.
SESSIONS.append(("2026-03-13-mbeki-spirometry-dlco.json", doc(
    "KVH-DLX1-88160", "88160", "2026-03-13T08:45:00+01:00", "mbeki", "DLX1",
    tests=[
        dict(type="spirometry", time="2026-03-13T08:49:00+01:00", values=[
            q("FEV1", 4.41, "L", "BTPS", ref(GLI12, 4.65, 3.78, 5.52, -0.44, 95), [3]),
            q("FVC", 5.71, "L", "BTPS", ref(GLI12, 5.75, 4.7, 6.8, -0.06, 99), [3]),
            q("FEV1_FVC", 0.772, "1", "none"),
            q("PEF", 10.3, "L/s", "BTPS")],
            trials=[dict(number=1, operatorAccepted=True, values=[q("FEV1", 4.33, "L", "BTPS"), q("FVC", 5.6, "L", "BTPS")]),
                    dict(number=2, operatorAccepted=True, values=[q("FEV1", 4.36, "L", "BTPS"), q("FVC", 5.66, "L", "BTPS")]),
                    dict(number=3, operatorAccepted=True, values=[q("FEV1", 4.41, "L", "BTPS"), q("FVC", 5.71, "L", "BTPS")])]),
        dict(type="diffusing-capacity", method="single-breath", time="2026-03-13T09:05:00+01:00", values=[
            q("DLCO", 33.5, "mL/min/mm[Hg]", "STPD", ref(GLI17, 35.2, 27.9, 42.5, -0.38, 95), [1, 2]),
            q("VA", 6.9, "L", "BTPS"),
            q("KCO", 4.86, "mL/min/mm[Hg]/L", "none"),
            q("VI", 5.45, "L", "BTPS"),
            q("BHT", 9.9, "s", "none"),
            q("HB", 15.2, "g/dL", "none")],
            trials=[dict(number=1, operatorAccepted=True, values=[q("DLCO", 33.9, "mL/min/mm[Hg]", "STPD"), q("VA", 6.95, "L", "BTPS")]),
                    dict(number=2, operatorAccepted=True, values=[q("DLCO", 33.1, "mL/min/mm[Hg]", "STPD"), q("VA", 6.85, "L", "BTPS")])])])))

# 18. Spirometry with PEF not measured and vendor extensions.
SESSIONS.append(("2026-03-16-brennigan-spirometry-followup.xml", doc(
    "KVH-SPX3-004822", "004822", "2026-03-16T09:00:00+01:00", "brennigan", "SPX3",
    environment=env(20.5, 102.1),
    tests=[dict(type="spirometry", time="2026-03-16T09:03:00+01:00", values=[
        q("FEV1", 3.6, "L", "ATPS", ref(GLI12, 3.94, 3.1, 4.78, -0.77, 91)),
        q("FVC", 4.62, "L", "ATPS"),
        q("FEV1_FVC", 0.779, "1", "none"),
        dict(kind="PEF", absent="not-measured"),
        q("FET", 8.2, "s", "none")],
        comments=["PEF sensor fault: flow-volume loop not stored"])],
    extensions=[dict(namespace="urn:example:aldercrest:flowquill", name="sessionSettings",
                     properties=[dict(name="filter", value="BF-200"), dict(name="btpsMode", value="off"),
                                 dict(name="operator", value="T. Varga")])])))

# 19. Preliminary DLCO result, awaiting Hb.
SESSIONS.append(("2026-03-17-delacorte-dlco-preliminary.json", doc(
    "KVH-DLX2-D0488", "D0488", "2026-03-17T10:10:00+01:00", "delacorte", "DLX2",
    status="preliminary",
    tests=[dict(type="diffusing-capacity", method="single-breath", time="2026-03-17T10:21:00+01:00", values=[
        q("DLCO", 4.35, "mmol/min/kPa", "STPD", ref(GLI17, 7.45, 5.6, 9.3, -2.9, 58)),
        q("VA", 5.1, "L", "BTPS"),
        q("KCO", 0.85, "mmol/min/kPa/L", "none"),
        q("VI", 2.9, "L", "BTPS"),
        q("BHT", 10.6, "s", "none"),
        dict(kind="HB", absent="not-measured")],
        comments=["Hb pending: report is preliminary"])],
    extensions=[dict(namespace="urn:example:brightmere:diffusa", name="gasAnalyser",
                     properties=[dict(name="tracer", value="CH4"), dict(name="coCalibration", value="2026-03-17T07:31:00+01:00")])])))

# 20. Lung volumes in JSON with reference values for each volume.
SESSIONS.append(("2026-03-18-ainsley-lung-volumes.json", doc(
    "KVH-BOX2-3412", "3412", "2026-03-18T11:15:00+01:00", "ainsley", "BOX2",
    tests=[dict(type="lung-volumes", method="body-plethysmography", time="2026-03-18T11:21:00+01:00", values=[
        q("TLC", 6.48, "L", "BTPS", ref(GLI21, 6.7, 5.6, 7.8, -0.26, 97)),
        q("VC", 4.69, "L", "BTPS", ref(GLI21, 4.85, 3.9, 5.8, -0.22, 97)),
        q("RV", 1.79, "L", "BTPS", ref(GLI21, 1.85, 1.25, 2.45, -0.13, 97)),
        q("FRC", 3.05, "L", "BTPS", ref(GLI21, 3.35, 2.4, 4.3, -0.42, 91)),
        q("ERV", 1.26, "L", "BTPS"),
        q("IC", 3.43, "L", "BTPS"),
        q("RV_TLC", 0.276, "1", "none", ref(GLI21, 0.29, 0.21, 0.37, -0.24))])])))

# ---- sessions with maneuver data (issue 4: recomputation, grades, adjustments) ----
#
# Each DLCO maneuver is described by its inspired volume, dead spaces, gas
# fractions, timing points and pressure; the alveolar fractions are chosen for
# a target VA and DLCO and rounded as an analyser would send them, and the
# device's own VA and DLCO are then computed back from the rounded fractions
# with the single-sample method of ../shared/reference/lung-function-facts.md
# ("Single-breath DLCO calculation"), so the numbers the device sends follow
# from its data (except where a session says otherwise on purpose).

MMHG_KPA = 0.133322   # kPa per mmHg (UCUM)
PH2O_BODY = 47.0      # mmHg, the trade's PH2O at 37 C
DLCO_SI = 2.987       # mL/min/mmHg per mmol/min/kPa (DECISIONS.md)


def jones_meade(t):
    """Breath-hold from 30 % of the inspiratory time to the middle of the sample."""
    start = t.get("insp30", t["insp_start"] + 0.3 * (t["insp_end"] - t["insp_start"]))
    return 0.5 * (t["sample_start"] + t["sample_end"]) - start


def single_breath(vi, vd, fico, faco, fitr, fatr, bht, pb_kpa):
    """VA (L BTPS) and DLCO (mL/min/mmHg, STPD) by the classic single-sample method."""
    pb = pb_kpa / MMHG_KPA
    va_btps = (vi - vd) * fitr / fatr
    btps_to_stpd = (pb - PH2O_BODY) / 760.0 * 273.15 / 310.15
    va_stpd = va_btps * btps_to_stpd
    faco0 = fico * fatr / fitr
    dlco = va_stpd * 60000.0 / (bht * (pb - PH2O_BODY)) * math.log(faco0 / faco)
    return va_btps, dlco, btps_to_stpd


def maneuver(number, time, *, vi, vd_instr, vd_anat, send_vd_anat, fico, fitr, tracer,
             target_va, target_dlco, timing, pb_kpa, washout=0.80, sample=0.60, insp85=1.6,
             send_insp30=False, si=True, dlco_factor=1.0, accepted=True, fa_decimals=6):
    """One single-breath maneuver as a device sends it, and its computed VA and DLCO.

    dlco_factor != 1 makes the device's DLCO deliberately not follow from its data."""
    vd = vd_instr + vd_anat
    fatr = round((vi - vd) * fitr / target_va, fa_decimals)
    bht = jones_meade(timing)
    pb = pb_kpa / MMHG_KPA
    va_btps = (vi - vd) * fitr / fatr
    va_stpd = va_btps * (pb - PH2O_BODY) / 760.0 * 273.15 / 310.15
    faco0 = fico * fatr / fitr
    faco = round(faco0 / math.exp(target_dlco * bht * (pb - PH2O_BODY) / (va_stpd * 60000.0)), 6)
    va, dlco, _ = single_breath(vi, vd, fico, faco, fitr, fatr, bht, pb_kpa)
    sent = dlco * dlco_factor
    values = [q("VI", vi, "L", "BTPS"), q("VD_INSTR", vd_instr, "L", "none")]
    if send_vd_anat:
        values.append(q("VD_ANAT", vd_anat, "L", "BTPS"))
    values += [q("FICO", fico, "1", "none"), q("FACO", faco, "1", "none"),
               q("FITR", fitr, "1", "none"), q("FATR", fatr, "1", "none"),
               q("T_INSP_START", timing["insp_start"], "s", "none")]
    if send_insp30:
        values.append(q("T_INSP_30", timing["insp30"], "s", "none"))
    values += [q("T_INSP_END", timing["insp_end"], "s", "none"),
               q("T_INSP_85", insp85, "s", "none"),
               q("T_SAMPLE_START", timing["sample_start"], "s", "none"),
               q("T_SAMPLE_END", timing["sample_end"], "s", "none"),
               q("V_WASHOUT", washout, "L", "BTPS"), q("V_SAMPLE", sample, "L", "BTPS"),
               q("BHT", round(bht, 1), "s", "none"),
               q("VA", round(va, 2), "L", "BTPS")]
    if si:
        sent_value = round(sent / DLCO_SI, 2)
        values.append(q("DLCO", sent_value, "mmol/min/kPa", "STPD"))
    else:
        sent_value = round(sent, 1)
        values.append(q("DLCO", sent_value, "mL/min/mm[Hg]", "STPD"))
    trial = dict(number=number, time=time, operatorAccepted=accepted, tracer=tracer, values=values)
    return trial, dict(va=round(va, 2), dlco=sent_value, bht=bht)


def timing(bht_target, insp_time=2.0, sample_time=1.0):
    """Timing points for a breath-hold (Jones-Meade) of bht_target s, 0.1 s resolution."""
    t = dict(insp_start=0.0, insp_end=insp_time, insp30=round(0.3 * insp_time, 2))
    mid = t["insp30"] + bht_target
    t["sample_start"] = round(mid - sample_time / 2, 2)
    t["sample_end"] = round(mid + sample_time / 2, 2)
    return t


def dlco_test(time, trials, summaries, reported, si=True, extra=(), comments=None):
    """The test-level values a device reports: the mean of the maneuvers named in `reported`."""
    used = [summaries[n - 1] for n in reported]
    if si:
        dlco = round(sum(s["dlco"] for s in used) / len(used), 2)
        unit, kco_unit = "mmol/min/kPa", "mmol/min/kPa/L"
    else:
        dlco = round(sum(s["dlco"] for s in used) / len(used), 1)
        unit, kco_unit = "mL/min/mm[Hg]", "mL/min/mm[Hg]/L"
    va = round(sum(s["va"] for s in used) / len(used), 2)
    values = [q("DLCO", dlco, unit, "STPD", trials=list(reported)),
              q("VA", va, "L", "BTPS", trials=list(reported)),
              q("KCO", round(dlco / va, 2), kco_unit, "none")] + list(extra)
    t = dict(type="diffusing-capacity", method="single-breath", time=time, values=values,
             trials=trials)
    if comments:
        t["comments"] = comments
    return t


def vc_test(time, fev1, fvc):
    """The spirometry a DLCO device records first, whose FVC is the VC of VI/VC."""
    return dict(type="spirometry", time=time, values=[
        q("FEV1", fev1, "L", "BTPS"), q("FVC", fvc, "L", "BTPS"),
        q("FEV1_FVC", round(fev1 / fvc, 3), "1", "none")])


def session_maneuvers(specs, common):
    trials, summaries = [], []
    for n, spec in enumerate(specs, start=1):
        kw = dict(common)
        kw.update(spec)
        tr, summary = maneuver(n, **kw)
        trials.append(tr)
        summaries.append(summary)
    return trials, summaries


CH4 = dict(fico=0.003, fitr=0.003, tracer="methane", fa_decimals=6)   # DLX2: 0.3 % CO, 0.3 % CH4
HE = dict(fico=0.003, fitr=0.10, tracer="helium", fa_decimals=5)      # DLX1: 0.3 % CO, 10 % He

# 21. (a) DLCO, DLX2 (SI, methane): three grade-A maneuvers, repeatable; the
# device's DLCO and VA follow from its fractions; VD_ANAT from body mass.
common = dict(CH4, vi=3.80, vd_instr=0.150, vd_anat=round(0.0022 * 66, 4), send_vd_anat=False,
              pb_kpa=101.2, si=True)
trials, summ = session_maneuvers([
    dict(time="2026-03-20T09:06:00+01:00", target_va=5.30, target_dlco=25.4, timing=timing(10.0)),
    dict(time="2026-03-20T09:11:00+01:00", target_va=5.26, target_dlco=24.8, timing=timing(10.2),
         vi=3.76),
    dict(time="2026-03-20T09:16:00+01:00", target_va=5.34, target_dlco=25.9, timing=timing(9.8),
         vi=3.83)], common)
SESSIONS.append(("2026-03-20-castellow-dlco-maneuvers.json", doc(
    "KVH-DLX2-D0501", "D0501", "2026-03-20T09:00:00+01:00", "castellow", "DLX2", schema="1.1",
    environment=env(22.0, 101.2),
    tests=[vc_test("2026-03-20T09:02:00+01:00", 3.39, 4.01),
           dlco_test("2026-03-20T09:16:00+01:00", trials, summ, [1, 2, 3],
                     comments=["Three maneuvers, all acceptable; reported DLCO is their mean"])])))

# 22. (b) DLCO, DLX2: four maneuvers; 2 held only 7.4 s (grade D), 3 inspired
# VI/VC 0.82 (grade C); 1 and 4 are grade A and repeatable, reported as their mean.
common = dict(CH4, vi=3.05, vd_instr=0.150, vd_anat=round(0.0022 * 58, 4), send_vd_anat=False,
              pb_kpa=100.6, si=True, send_insp30=True)
trials, summ = session_maneuvers([
    dict(time="2026-03-20T14:05:00+01:00", target_va=4.72, target_dlco=21.2, timing=timing(10.1)),
    dict(time="2026-03-20T14:10:00+01:00", target_va=4.70, target_dlco=22.6, timing=timing(7.4)),
    dict(time="2026-03-20T14:15:00+01:00", target_va=4.21, target_dlco=19.1, timing=timing(10.3),
         vi=round(0.82 * 3.30, 3)),
    dict(time="2026-03-20T14:20:00+01:00", target_va=4.75, target_dlco=21.8, timing=timing(9.9),
         vi=3.08)], common)
SESSIONS.append(("2026-03-20-quist-dlco-maneuvers.xml", doc(
    "KVH-DLX2-D0502", "D0502", "2026-03-20T14:00:00+01:00", "quist", "DLX2", schema="1.1",
    environment=env(21.5, 100.6),
    tests=[vc_test("2026-03-20T14:02:00+01:00", 2.61, 3.30),
           dlco_test("2026-03-20T14:20:00+01:00", trials, summ, [1, 4],
                     comments=["Maneuver 2: early expiration; maneuver 3: incomplete inspiration"])])))

# 23. (c) DLCO, DLX1 (traditional, helium): the device's DLCO does not follow
# from its maneuvers: it is computed with VA at BTPS instead of STPD (a factor
# 1 / 0.8251 at this pressure), so it reads about 21 % high.
common = dict(HE, vi=2.62, vd_instr=0.120, vd_anat=0.135, send_vd_anat=True, pb_kpa=100.9,
              si=False)
pb = 100.9 / MMHG_KPA
btps_to_stpd = (pb - PH2O_BODY) / 760.0 * 273.15 / 310.15
trials, summ = session_maneuvers([
    dict(time="2026-03-23T10:04:00+01:00", target_va=4.40, target_dlco=19.9, timing=timing(10.0),
         dlco_factor=1 / btps_to_stpd),
    dict(time="2026-03-23T10:09:30+01:00", target_va=4.36, target_dlco=19.6, timing=timing(10.4),
         vi=2.60, dlco_factor=1 / btps_to_stpd)], common)
SESSIONS.append(("2026-03-23-ilvesson-dlco-maneuvers.xml", doc(
    "KVH-DLX1-88210", "88210", "2026-03-23T10:00:00+01:00", "ilvesson", "DLX1", schema="1.1",
    environment=env(22.5, 100.9),
    tests=[vc_test("2026-03-23T10:02:00+01:00", 2.02, 2.70),
           dlco_test("2026-03-23T10:09:30+01:00", trials, summ, [1, 2], si=False)])))

# 24. (f) DLCO, DLX2: Hb 118 g/L and COHb 3.6 % (Delacorte-Hale's Hb, pending on
# 2026-03-17, now measured); low DLCO with emphysema, two repeatable maneuvers.
common = dict(CH4, vi=2.90, vd_instr=0.150, vd_anat=round(0.0022 * 79, 4), send_vd_anat=False,
              pb_kpa=101.6, si=True, insp85=2.4, timing=timing(10.2, insp_time=3.0))
trials, summ = session_maneuvers([
    dict(time="2026-03-26T10:06:00+01:00", target_va=5.05, target_dlco=13.2),
    dict(time="2026-03-26T10:11:00+01:00", target_va=5.12, target_dlco=12.7, vi=2.93)], common)
SESSIONS.append(("2026-03-26-delacorte-dlco-hb-cohb.json", doc(
    "KVH-DLX2-D0530", "D0530", "2026-03-26T10:00:00+01:00", "delacorte", "DLX2", schema="1.1",
    environment=env(22.0, 101.6),
    tests=[vc_test("2026-03-26T10:02:00+01:00", 1.50, 3.04),
           dlco_test("2026-03-26T10:11:00+01:00", trials, summ, [1, 2],
                     extra=[q("HB", 118, "g/L", "none"), q("COHB", 3.6, "%", "none")],
                     comments=["Hb and COHb from a venous sample taken at the session"])])))

# 25. (f) DLCO, DLX2 at the hospital's hill outreach clinic (about 1600 m,
# PB 84.0 kPa): the altitude adjustment to PIO2 150 mmHg appears.
common = dict(CH4, vi=5.55, vd_instr=0.150, vd_anat=round(0.0022 * 83, 4), send_vd_anat=False,
              pb_kpa=84.0, si=True)
trials, summ = session_maneuvers([
    dict(time="2026-03-27T11:05:00+01:00", target_va=7.05, target_dlco=36.4, timing=timing(10.1)),
    dict(time="2026-03-27T11:10:00+01:00", target_va=7.10, target_dlco=35.6, timing=timing(9.9),
         vi=5.58)], common)
SESSIONS.append(("2026-03-27-mbeki-dlco-altitude.xml", doc(
    "KVH-DLX2-D0541", "D0541", "2026-03-27T11:00:00+01:00", "mbeki", "DLX2", schema="1.1",
    environment=env(19.5, 84.0),
    tests=[vc_test("2026-03-27T11:02:00+01:00", 4.45, 5.76),
           dlco_test("2026-03-27T11:10:00+01:00", trials, summ, [1, 2],
                     comments=["Outreach clinic, Kestrel Vale hill site (about 1600 m)"])])))


def spiro_trial(number, time, accepted, fev1, fvc, pef, bev, fet, eotv, fivc, unit="L", cond="BTPS",
                pef_unit="L/s"):
    return dict(number=number, time=time, operatorAccepted=accepted, values=[
        q("FEV1", fev1, unit, cond), q("FVC", fvc, unit, cond), q("PEF", pef, pef_unit, cond),
        q("BEV", bev, unit, cond), q("FET", fet, "s", "none"), q("EOTV", eotv, unit, cond),
        q("FIVC", fivc, unit, cond)])


# 26. (d) Spirometry, SPX3 at ATPS in mL: three acceptable trials within
# 0.150 L, grade A for FEV1 and FVC; the reported values are the largest.
tr = [spiro_trial(1, "2026-03-24T08:41:00+01:00", True, 3250, 4210, 538, 80, 9.8, 15, 4180, "mL", "ATPS", "L/min"),
      spiro_trial(2, "2026-03-24T08:42:30+01:00", True, 3290, 4240, 552, 95, 10.4, 18, 4230, "mL", "ATPS", "L/min"),
      spiro_trial(3, "2026-03-24T08:44:00+01:00", True, 3220, 4180, 531, 70, 9.1, 12, 4150, "mL", "ATPS", "L/min")]
SESSIONS.append(("2026-03-24-brennigan-spirometry-trials.json", doc(
    "KVH-SPX3-004850", "004850", "2026-03-24T08:38:00+01:00", "brennigan", "SPX3", schema="1.1",
    environment=env(22.0, 101.2, rh=40),
    tests=[dict(type="spirometry", time="2026-03-24T08:44:00+01:00", values=[
        q("FEV1", 3290, "mL", "ATPS", trials=[2]), q("FVC", 4240, "mL", "ATPS", trials=[2]),
        q("FEV1_FVC", 77.6, "%", "none"), q("PEF", 552, "L/min", "ATPS", trials=[2]),
        q("FET", 10.4, "s", "none")], trials=tr,
        comments=["Three acceptable maneuvers"])])))

# 27. (e) Spirometry, BOX2 at BTPS: three acceptable trials that are not
# repeatable (FEV1 0.18 L apart: grade C; FVC 0.23 L apart: grade D).
tr = [spiro_trial(1, "2026-03-24T10:12:00+01:00", True, 2.46, 3.04, 6.1, 0.06, 8.6, 0.012, 3.00),
      spiro_trial(2, "2026-03-24T10:14:00+01:00", True, 2.28, 2.81, 5.6, 0.07, 8.1, 0.015, 2.79),
      spiro_trial(3, "2026-03-24T10:16:00+01:00", True, 2.20, 2.74, 5.4, 0.05, 7.9, 0.010, 2.70)]
SESSIONS.append(("2026-03-24-andersby-spirometry-not-repeatable.xml", doc(
    "KVH-BOX2-3460", "3460", "2026-03-24T10:10:00+01:00", "andersby", "BOX2", schema="1.1",
    tests=[dict(type="spirometry", time="2026-03-24T10:16:00+01:00", values=[
        q("FEV1", 2.46, "L", "BTPS", trials=[1]), q("FVC", 3.04, "L", "BTPS", trials=[1]),
        q("FEV1_FVC", 0.809, "1", "none"), q("PEF", 6.1, "L/s", "BTPS", trials=[1])], trials=tr,
        comments=["Patient tired after the first maneuver; no further attempts"])])))

# 28. (e) Spirometry, BOX2 at BTPS: trial 2 has a back-extrapolated volume of
# 0.32 L (limit 5 % of FVC = 0.233 L), so it is neither acceptable nor usable;
# the device still reported its (inflated) FEV1.
tr = [spiro_trial(1, "2026-03-25T09:31:00+01:00", True, 3.58, 4.68, 9.2, 0.09, 9.5, 0.014, 4.60),
      spiro_trial(2, "2026-03-25T09:33:00+01:00", True, 3.79, 4.66, 9.9, 0.32, 9.1, 0.017, 4.62),
      spiro_trial(3, "2026-03-25T09:35:00+01:00", True, 3.62, 4.72, 9.4, 0.11, 10.2, 0.011, 4.70)]
SESSIONS.append(("2026-03-25-ainsley-spirometry-bev.json", doc(
    "KVH-BOX2-3471", "3471", "2026-03-25T09:28:00+01:00", "ainsley", "BOX2", schema="1.1",
    tests=[dict(type="spirometry", time="2026-03-25T09:35:00+01:00", values=[
        q("FEV1", 3.79, "L", "BTPS", trials=[2]), q("FVC", 4.72, "L", "BTPS", trials=[3]),
        q("FEV1_FVC", 0.803, "1", "none"), q("PEF", 9.9, "L/s", "BTPS", trials=[2])], trials=tr)])))

# ---- incomplete or implausible on purpose (schema-valid; core validation refuses them) ----

def bad(name, d):
    SESSIONS.append((name, d))


b = doc("KVH-SPX3-004901", "004901", "2026-03-19T09:00:00+01:00", "castellow", "SPX3",
        tests=[dict(type="spirometry", time="2026-03-19T09:03:00+01:00", values=[
            q("FEV1", 3.3, "L"), q("FVC", 3.95, "L", "BTPS"), q("FEV1_FVC", 0.835, "1", "none")])])
bad("bad-condition-missing.xml", b)

b = doc("KVH-DLX1-88190", "88190", "2026-03-19T10:00:00+01:00", "quist", "DLX1",
        tests=[dict(type="diffusing-capacity", method="single-breath", time="2026-03-19T10:09:00+01:00", values=[
            q("DLCO", 19.2, "mL/min/mmHg", "STPD"), q("VA", 4.6, "L", "BTPS"), q("HB", 13.1, "g/dL", "none")])])
bad("bad-unit-not-ucum.json", b)

b = doc("KVH-SPX3-004902", "004902", "2026-03-19T11:00:00+01:00", "ilvesson", "SPX3",
        tests=[dict(type="spirometry", time="2026-03-19T11:03:00+01:00", values=[
            q("FEV1", 2050, "mL", "ATPS"), q("FVC", 2700, "mL", "ATPS")])])
bad("bad-atps-no-ambient.xml", b)

b = doc("KVH-BOX2-3430", "3430", "2026-03-19T13:00:00+01:00", "andersby", "BOX2",
        tests=[dict(type="spirometry", time="2026-03-19T13:04:00+01:00", values=[
            q("FEV1", 3.12, "L", "BTPS"), q("FVC", 2.95, "L", "BTPS")])])
bad("bad-fev1-greater-than-fvc.json", b)

b = doc("KVH-BOX2-3431", "3431", "2026-03-19T13:30:00+01:00", "brennigan", "BOX2",
        tests=[dict(type="spirometry", time="2026-03-19T13:33:00+01:00", values=[
            q("FEV1", 80, "L", "BTPS"), q("FVC", 95, "L", "BTPS")])])
bad("bad-fev1-80-litres.xml", b)

anon = copy.deepcopy(PATIENTS["ainsley"])
del anon["identifiers"]
b = doc("KVH-SPX3-004903", "004903", "2026-03-19T14:00:00+01:00", anon, "SPX3",
        environment=env(22.0, 100.9),
        tests=[dict(type="spirometry", time="2026-03-19T14:02:00+01:00", values=[
            q("FEV1", 3.5, "L", "ATPS"), q("FVC", 4.55, "L", "ATPS")])])
bad("bad-no-patient-identifier.json", b)


# ---- the JSON Lines archive: a few 2019 sessions, one result per line ----

def archive():
    lines = []
    for n, (pat, f1, fv) in enumerate((("ilvesson", 2.24, 2.91), ("brennigan", 3.78, 4.82),
                                       ("delacorte", 1.85, 3.2), ("quist", 2.58, 3.35)), start=1):
        d = doc(f"KVH-SPX1-2019-{n:04d}", f"2019-{n:04d}", f"2019-0{n}-14T10:0{n}:00+01:00", pat, "SPX3",
                tests=[dict(type="spirometry", time=f"2019-0{n}-14T10:1{n}:00+01:00", values=[
                    q("FEV1", f1, "L", "BTPS", ref(GLI12, round(f1 * 1.05, 2), round(f1 * 0.8, 2))),
                    q("FVC", fv, "L", "BTPS"),
                    q("FEV1_FVC", round(f1 / fv, 3), "1", "none")])])
        d["device"] = dict(id="SPX1", manufacturer="Aldercrest Instruments", model="FlowQuill 1",
                           serial="AQ1-00877", software="1.4.2")
        lines.append(json.dumps(d, ensure_ascii=False, separators=(",", ":")))
    with open(os.path.join(OUT, "archive-2019.jsonl"), "w", encoding="utf-8") as f:
        f.write("\n".join(lines) + "\n")


for name, d in SESSIONS:
    write(name, d)
archive()
print(f"{len(SESSIONS)} documents and archive-2019.jsonl written to {os.path.normpath(OUT)}")
