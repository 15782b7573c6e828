"""OTDR inputs of a project folder: trace files matched to links, otdr/index.csv, event tables,
testing.otdr, and one clear message per problem naming file, line and field."""
from __future__ import annotations

import pytest

from builders import synth_sor
from reportgen.errors import InputError
from reportgen.inputs.project import load_project
from reportgen.inputs.sor import write_sor
from reportgen.model import Direction, OtdrEventKind, Polish

OTDR_YAML = (
    "project:\n  title: Test backbone\n  contractor: {name: Test Cabling}\n"
    "testing:\n  limits: tia-568.3-d\n  reference_method: one-cord\n"
    "  otdr: {launch_cord_m: 150, receive_cord_m: 150, polish: apc, splice_db: 0.1}\n"
    "instruments:\n  - {id: SRC-1, kind: light-source}\n  - {id: PM-1, kind: power-meter}\n"
)


def sor_bytes(origin="Room 1", cable="L2", fiber="1", wavelength=1310):
    return write_sor(synth_sor([(650.0, 0.1, None)], 1800.0, cable_id=cable, fiber_id=fiber, origin=origin,
                               nominal_wavelength_nm=wavelength, wavelength_nm=float(wavelength)))


EVENTS_CSV = (
    "link_id,strand,wavelength_nm,direction,distance_m,event,loss_db,reflectance_db,tested_at,instrument,technician\n"
    "L2,1,1550,ab,0,launch,0,-55,2030-01-15T11:00,OT-1,A. Tester\n"
    "L2,1,1550,ab,150,connector,0.21,-58,2030-01-15T11:00,OT-1,A. Tester\n"
    "L2,1,1550,ab,800,splice,0.05,,2030-01-15T11:00,OT-1,A. Tester\n"
    "L2,1,1550,ab,1800,end,0,-14.4,2030-01-15T11:00,OT-1,A. Tester\n"
)


def test_trace_files_are_matched_by_cable_fiber_and_origin(make_project):
    root = make_project({"project.yaml": OTDR_YAML, "otdr/L2/a.sor": sor_bytes(),
                         "otdr/L2/b.sor": sor_bytes(origin="hut 3")})  # end_b, case ignored
    project = load_project(root)
    assert [(t.source_file, t.direction) for t in project.otdr] == [
        ("otdr/L2/a.sor", Direction.AB), ("otdr/L2/b.sor", Direction.BA)]
    assert project.testing.otdr.polish is Polish.APC and project.testing.otdr.launch_cord_m == 150
    trace = project.otdr[0]
    assert trace.wavelength_nm == 1310 and trace.group_index == pytest.approx(1.4682)
    splice = [e for e in trace.events if e.kind is OtdrEventKind.SPLICE]
    assert len(splice) == 1 and splice[0].position_m == pytest.approx(650.0, abs=0.02)
    assert "otdr/L2/a.sor" in project.files_read


def test_index_csv_overrides_the_file_ids(make_project):
    root = make_project({"otdr/x.sor": sor_bytes(cable="cable 9", origin="somewhere"),
                         "otdr/index.csv": "file,link_id,strand,direction\nx.sor,L2,1,ba\n"})
    project = load_project(root)
    assert [(t.link_id, t.direction) for t in project.otdr] == [("L2", Direction.BA)]


def test_an_unmatched_trace_file_is_an_error_naming_it(make_project):
    root = make_project({"otdr/stray.sor": sor_bytes(cable="nowhere"),
                         "otdr/wrong-end.sor": sor_bytes(origin="Basement")})
    with pytest.raises(InputError) as caught:
        load_project(root)
    text = [str(p) for p in caught.value.problems]
    assert any(t.startswith("otdr/stray.sor, GenParams cable id: expected a link_id of links.csv") for t in text)
    assert any(t.startswith("otdr/wrong-end.sor, GenParams originating location: expected end_a")
               for t in text)


def test_a_damaged_trace_file_is_an_error_naming_it(make_project):
    data = sor_bytes()
    root = make_project({"otdr/cut.sor": data[:300], "otdr/bad.sor": data[:-1] + bytes([data[-1] ^ 1])})
    with pytest.raises(InputError) as caught:
        load_project(root)
    text = sorted(str(p) for p in caught.value.problems)
    assert text[0].startswith("otdr/bad.sor: expected an OTDR trace file of SR-4731 issue 1 or 2: wrong checksum")
    assert text[1].startswith("otdr/cut.sor: expected an OTDR trace file of SR-4731 issue 1 or 2: the file is truncated")


def test_event_tables_are_read(make_project):
    root = make_project({"project.yaml": OTDR_YAML, "otdr/events.csv": EVENTS_CSV})
    (trace,) = load_project(root).otdr
    assert (trace.link_id, trace.strand, trace.wavelength_nm, trace.direction) == ("L2", 1, 1550, Direction.AB)
    assert [e.kind.value for e in trace.events] == ["launch", "connector", "splice", "end"]
    assert trace.events[2].reflectance_db is None and trace.events[1].reflectance_db == -58.0
    assert (trace.source_file, trace.source_line) == ("otdr/events.csv", 2)


def test_event_table_distance_in_feet(make_project):
    text = EVENTS_CSV.replace("distance_m", "distance_ft")
    root = make_project({"otdr/events.csv": text})
    (trace,) = load_project(root).otdr
    assert trace.events[2].position_m == pytest.approx(800 * 0.3048)  # international foot, exact


def test_every_event_table_problem_in_one_run(make_project):
    bad = (EVENTS_CSV.splitlines()[0] + "\n"
           "L9,1,1550,ab,0,launch,0,,2030-01-15,OT-1,A\n"
           "L2,7,1550,ab,10,connector,0.2,,2030-01-15,OT-1,A\n"
           "L2,1,1550,up,10,connector,0.2,,2030-01-15,OT-1,A\n"
           "L2,1,1550,ab,-5,splice,0.2,,2030-01-15,OT-1,A\n"
           "L2,1,1550,ab,10,weld,0.2,,2030-01-15,OT-1,A\n"
           "L2,1,1550,ab,10,splice,lots,,2030-01-15,OT-1,A\n"
           "L2,1,1550,ab,10,connector,0.2,+3,2030-01-15,OT-1,A\n"
           "L2,1,1550,ab,10,splice,0.2,,,OT-1,A\n")
    root = make_project({"otdr/events.csv": bad, "otdr/index.csv": "file,link_id,strand,direction\nmissing.sor,L2,1,ab\n"})
    with pytest.raises(InputError) as caught:
        load_project(root)
    where = [(p.file, p.line, p.field) for p in caught.value.problems]
    assert where == [
        ("otdr/index.csv", 2, "file"),
        ("otdr/events.csv", 2, "link_id"),
        ("otdr/events.csv", 3, "strand"),
        ("otdr/events.csv", 4, "direction"),
        ("otdr/events.csv", 5, "distance_m"),
        ("otdr/events.csv", 6, "event"),
        ("otdr/events.csv", 7, "loss_db"),
        ("otdr/events.csv", 8, "reflectance_db"),
        ("otdr/events.csv", 9, "tested_at"),
    ]


def test_two_traces_of_one_key_are_refused(make_project):
    root = make_project({"otdr/a.sor": sor_bytes(), "otdr/b.sor": sor_bytes()})
    with pytest.raises(InputError) as caught:
        load_project(root)
    (problem,) = caught.value.problems
    assert problem.file == "otdr/b.sor" and "also in otdr/a.sor" in problem.expected


def test_testing_otdr_values_are_checked(make_project):
    yaml = OTDR_YAML.replace("polish: apc, splice_db: 0.1", "polish: mirror, splice_db: -1")
    with pytest.raises(InputError) as caught:
        load_project(make_project({"project.yaml": yaml}))
    assert [(p.file, p.field) for p in caught.value.problems] == [
        ("project.yaml", "testing.otdr.splice_db"), ("project.yaml", "testing.otdr.polish")]


def test_summary_json_carries_the_otdr_results(make_project, tmp_path):
    import json

    from reportgen.pipeline import build

    root = make_project({"project.yaml": OTDR_YAML, "otdr/events.csv": EVENTS_CSV})
    build(root, tmp_path / "out", report=False)
    links = {entry["link_id"]: entry for entry in
             json.loads((tmp_path / "out" / "summary.json").read_text())["links"]}
    assert links["L1"]["otdr"] == []
    (strand,) = links["L2"]["otdr"]
    assert (strand["strand"], strand["wavelength_nm"], strand["directions"]) == (1, 1550, ["ab"])
    # 1800 m end − 150 m launch cord − 150 m receive cord = 1500 m, links.csv's length
    assert strand["length_m"] == 1500.0
    # the table shows one end connection of two, and a splice links.csv does not list for L2
    assert strand["findings"] == ["connection-count", "splice-count"]
    kinds = [(e["kind"], e["position_m"], e["loss_ab_db"], e["verdict"]) for e in strand["events"]]
    assert kinds == [("launch", -150.0, 0.0, "not-judged"), ("connector", 0.0, 0.21, "pass"),
                     ("splice", 650.0, 0.05, "pass"), ("end", 1650.0, 0.0, "not-judged")]


def test_a_trace_file_linking_outside_the_project_is_refused(make_project, tmp_path):
    outside = tmp_path / "elsewhere.sor"
    outside.write_bytes(sor_bytes())
    root = make_project()
    (root / "otdr").mkdir()
    (root / "otdr" / "a.sor").symlink_to(outside)
    with pytest.raises(InputError) as caught:
        load_project(root)
    (problem,) = caught.value.problems
    assert problem.file == "otdr/a.sor" and "symbolic link leading outside" in problem.expected


@pytest.mark.parametrize("il_db, finding", [(1.05, False), (1.40, True)])
def test_otdr_end_to_end_loss_is_compared_with_the_insertion_loss(make_project, il_db, finding):
    from reportgen.engine.judge import judge_project
    from reportgen.engine.otdr import assess_otdr

    results = ("link_id,strand,wavelength_nm,direction,loss_db,tested_at,instrument\n"
               f"L2,1,1310,ab,{il_db:.2f},2030-01-15T10:00,SRC-1\n")
    # the trace's own end-to-end loss: 0.1 dB splice + 0.35 dB/km × 1.8 km = 0.73 dB;
    # 1.05 − 0.73 = 0.32 dB is within 0.5 dB, 1.40 − 0.73 = 0.67 dB is not
    project = load_project(make_project({"otdr/a.sor": sor_bytes(), "results/day1.csv": results}))
    (strand,) = assess_otdr(project, judge_project(project)).strands
    assert strand.end_to_end_loss_db == pytest.approx(0.73)
    assert strand.insertion_loss_db == pytest.approx(il_db)
    assert ("il-differs" in strand.findings) is finding


def test_a_trace_of_a_link_whose_row_is_wrong_adds_no_second_message(make_project):
    links = "link_id,end_a,end_b,fiber_type,length_m,strands\nL1,Room 1,Room 2,OM4,120,2\nL2,Room 1,Hut 3,OS9,1500,1\n"
    root = make_project({"links.csv": links, "otdr/a.sor": sor_bytes(), "results/day1.csv": None})
    with pytest.raises(InputError) as caught:
        load_project(root)
    assert [(p.file, p.field) for p in caught.value.problems] == [("links.csv", "fiber_type")]
