"""Generated inputs of any size for the scale, kill and fuzz tests (shared by them)."""

from __future__ import annotations

from pathlib import Path


def chain_design(n: int, value: str = "10k", name: str = "chain") -> str:
    """A design TOML of ``n`` 0603 resistors in series between two wire pads (every net has two pins)."""
    out = [f'[design]\nname = "{name}"\n']
    for i in range(1, n + 1):
        out.append(f'[parts.R{i}]\nkind = "resistor"\nvalue = "{value}"\npackage = "0603"\n')
    out.append('[parts.P1]\nkind = "wire-pad"\npackage = "pad-1.5mm"\n'
               '[parts.P2]\nkind = "wire-pad"\npackage = "pad-1.5mm"\n[nets]\nN0 = ["P1.1", "R1.1"]\n')
    out.extend(f'N{i} = ["R{i}.2", "R{i + 1}.1"]\n' for i in range(1, n))
    out.append(f'N{n} = ["R{n}.2", "P2.1"]\n')
    return "".join(out)


def box_cavity(path: Path, w: float = 80.0, h: float = 60.0) -> Path:
    """A DXF drawing (millimetres) whose CAVITY is a ``w`` x ``h`` rectangle."""
    import ezdxf

    doc = ezdxf.new("R2010", units=ezdxf.units.MM)
    doc.modelspace().add_lwpolyline([(0, 0), (w, 0), (w, h), (0, h)], close=True, dxfattribs={"layer": "CAVITY"})
    doc.saveas(path)
    return path


def chain_project(folder: Path, n: int, value: str = "10k", cavity: bool = True) -> Path:
    """A project folder with :func:`chain_design` and (optionally) :func:`box_cavity`."""
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "design.toml").write_text(chain_design(n, value))
    text = '[project]\ndesign = "design.toml"\n'
    if cavity:
        box_cavity(folder / "bay.dxf")
        text += 'cavity = "bay.dxf"\n'
    (folder / "project.toml").write_text(text)
    return folder
