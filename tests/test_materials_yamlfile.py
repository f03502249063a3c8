"""Tests of filmstack.io.yamlfile: numbers read as numbers, line table, precise errors."""

import pytest

from filmstack.errors import InputError
from filmstack.io.yamlfile import line_of, load_yaml, load_yaml_text


class TestNumbers:
    def test_exponent_floats_are_numbers(self):
        # YAML 1.2 core schema (yaml.org/spec/1.2.2, 10.3.2): 1e-3 is a float; PyYAML (YAML 1.1)
        # would return the text '1e-3'.
        data, _ = load_yaml_text("a: 1e-3\nb: 5E2\nc: -1.5e+3\nd: 1.5e3\ne: .5\n")
        assert data == {"a": 1e-3, "b": 500.0, "c": -1500.0, "d": 1500.0, "e": 0.5}
        assert all(isinstance(v, float) for v in data.values())

    def test_integers_stay_integers_and_text_stays_text(self):
        data, _ = load_yaml_text("n: 12\nname: TiO2\nv: 1e\nw: e5\n")
        assert data == {"n": 12, "name": "TiO2", "v": "1e", "w": "e5"}
        assert isinstance(data["n"], int)


class TestLines:
    TEXT = ("incident: air\n"
            "layers:\n"
            "  - {material: TiO2, nm: 12}\n"
            "  - material: SiO2\n"
            "    nm: {fit: 1e2}\n")

    def test_key_paths_map_to_lines(self):
        data, lines = load_yaml_text(self.TEXT)
        assert data["layers"][1]["nm"] == {"fit": 100.0}
        assert lines["incident"] == 1
        assert lines["layers"] == 2
        assert lines["layers[0]"] == 3
        assert lines["layers[0].nm"] == 3
        assert lines["layers[1].material"] == 4
        assert lines["layers[1].nm.fit"] == 5

    def test_line_of_falls_back_to_parent(self):
        _, lines = load_yaml_text(self.TEXT)
        assert line_of(lines, "layers[1].nm.max") == 5
        assert line_of(lines, "layers[1].k") == 4
        assert line_of(lines, "nothing") == 1


class TestErrors:
    def test_duplicate_key(self):
        with pytest.raises(InputError) as e:
            load_yaml_text("a: 1\nb: 2\na: 3\n", "x.yaml")
        assert e.value.line == 3 and e.value.key == "a" and e.value.file == "x.yaml"
        assert "duplicate key 'a'" in str(e.value) and "line 1" in str(e.value)

    def test_syntax_error_has_line(self):
        with pytest.raises(InputError) as e:
            load_yaml_text("a: 1\nb: {c: 1\n  d: 2}\n", "x.yaml")
        assert e.value.line == 3 and "not valid YAML" in str(e.value)

    def test_missing_file(self, tmp_path):
        with pytest.raises(InputError, match="file not found"):
            load_yaml(tmp_path / "nope.yaml")

    def test_reads_a_file(self, tmp_path):
        p = tmp_path / "s.yaml"
        p.write_text("x: 2e-3\n", encoding="utf-8")
        data, lines = load_yaml(p)
        assert data == {"x": 0.002} and lines["x"] == 1
