"""Write shapes/cylinder.step: a solid cylinder (radius 30 mm, height 60 mm, base centre at the origin,
axis +z) as an ISO 10303-21 (STEP AP214) boundary representation, written entity by entity.

Three faces: the bottom and top planes and the cylindrical side, closed by one seam line; every
face's outer loop runs counter-clockwise about its outward normal. Run:
    python -m truepull.shapes.make_cylinder_step [OUT]
"""

from __future__ import annotations

import sys
from pathlib import Path

RADIUS_MM = 30.0
HEIGHT_MM = 60.0


def step_text(radius: float = RADIUS_MM, height: float = HEIGHT_MM) -> str:
    """The STEP file of the cylinder, lengths in millimetres."""
    R, H = float(radius), float(height)
    e = [
        "CARTESIAN_POINT('',(0.,0.,0.))",                       # 1 base centre
        "DIRECTION('',(0.,0.,1.))",                             # 2 axis
        "DIRECTION('',(1.,0.,0.))",                             # 3 reference direction
        "AXIS2_PLACEMENT_3D('',#1,#2,#3)",                      # 4
        f"CARTESIAN_POINT('',(0.,0.,{H!r}))",                   # 5 top centre
        "AXIS2_PLACEMENT_3D('',#5,#2,#3)",                      # 6
        f"CIRCLE('',#4,{R!r})",                                 # 7 bottom rim
        f"CIRCLE('',#6,{R!r})",                                 # 8 top rim
        f"CARTESIAN_POINT('',({R!r},0.,0.))",                   # 9
        f"CARTESIAN_POINT('',({R!r},0.,{H!r}))",                # 10
        "VERTEX_POINT('',#9)",                                  # 11
        "VERTEX_POINT('',#10)",                                 # 12
        "VECTOR('',#2,1.)",                                     # 13
        "LINE('',#9,#13)",                                      # 14 seam
        "EDGE_CURVE('',#11,#11,#7,.T.)",                        # 15
        "EDGE_CURVE('',#12,#12,#8,.T.)",                        # 16
        "EDGE_CURVE('',#11,#12,#14,.T.)",                       # 17
        "ORIENTED_EDGE('',*,*,#15,.F.)",                        # 18 bottom, seen from below
        "EDGE_LOOP('',(#18))",                                  # 19
        "FACE_OUTER_BOUND('',#19,.T.)",                         # 20
        "PLANE('',#4)",                                         # 21
        "ADVANCED_FACE('',(#20),#21,.F.)",                      # 22 bottom (normal -z)
        "ORIENTED_EDGE('',*,*,#16,.T.)",                        # 23
        "EDGE_LOOP('',(#23))",                                  # 24
        "FACE_OUTER_BOUND('',#24,.T.)",                         # 25
        "PLANE('',#6)",                                         # 26
        "ADVANCED_FACE('',(#25),#26,.T.)",                      # 27 top
        "ORIENTED_EDGE('',*,*,#15,.T.)",                        # 28 side: bottom rim forward,
        "ORIENTED_EDGE('',*,*,#17,.T.)",                        # 29 up the seam,
        "ORIENTED_EDGE('',*,*,#16,.F.)",                        # 30 top rim back,
        "ORIENTED_EDGE('',*,*,#17,.F.)",                        # 31 down the seam
        "EDGE_LOOP('',(#28,#29,#30,#31))",                      # 32
        "FACE_OUTER_BOUND('',#32,.T.)",                         # 33
        f"CYLINDRICAL_SURFACE('',#4,{R!r})",                    # 34
        "ADVANCED_FACE('',(#33),#34,.T.)",                      # 35 side
        "CLOSED_SHELL('',(#22,#27,#35))",                       # 36
        "MANIFOLD_SOLID_BREP('cylinder',#36)",                  # 37
        "(LENGTH_UNIT()NAMED_UNIT(*)SI_UNIT(.MILLI.,.METRE.))",  # 38
        "(NAMED_UNIT(*)PLANE_ANGLE_UNIT()SI_UNIT($,.RADIAN.))",  # 39
        "(NAMED_UNIT(*)SI_UNIT($,.STERADIAN.)SOLID_ANGLE_UNIT())",  # 40
        "UNCERTAINTY_MEASURE_WITH_UNIT(LENGTH_MEASURE(1.E-07),#38,'distance_accuracy_value','')",  # 41
        "(GEOMETRIC_REPRESENTATION_CONTEXT(3)GLOBAL_UNCERTAINTY_ASSIGNED_CONTEXT((#41))"
        "GLOBAL_UNIT_ASSIGNED_CONTEXT((#38,#39,#40))REPRESENTATION_CONTEXT('',''))",  # 42
        "ADVANCED_BREP_SHAPE_REPRESENTATION('',(#37,#4),#42)",   # 43
        "APPLICATION_CONTEXT('automotive design')",             # 44
        "PRODUCT_CONTEXT('',#44,'mechanical')",                 # 45
        "PRODUCT('cylinder','cylinder','',(#45))",              # 46
        "PRODUCT_DEFINITION_FORMATION('','',#46)",              # 47
        "PRODUCT_DEFINITION_CONTEXT('part definition',#44,'design')",  # 48
        "PRODUCT_DEFINITION('design','',#47,#48)",              # 49
        "PRODUCT_DEFINITION_SHAPE('','',#49)",                  # 50
        "SHAPE_DEFINITION_REPRESENTATION(#50,#43)",             # 51
        "APPLICATION_PROTOCOL_DEFINITION('international standard','automotive_design',2000,#44)",  # 52
    ]
    body = "\n".join(f"#{i + 1}={x};" for i, x in enumerate(e))
    return ("ISO-10303-21;\nHEADER;\nFILE_DESCRIPTION(('solid cylinder'),'2;1');\n"
            "FILE_NAME('cylinder.step','',(''),(''),'','','');\n"
            "FILE_SCHEMA(('AUTOMOTIVE_DESIGN { 1 0 10303 214 1 1 1 1 }'));\nENDSEC;\nDATA;\n"
            f"{body}\nENDSEC;\nEND-ISO-10303-21;\n")


def main(argv=None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    out = Path(argv[0]) if argv else Path(__file__).with_name("cylinder.step")
    tmp = out.with_name(out.name + ".part")
    tmp.write_text(step_text())
    tmp.replace(out)
    print(f"wrote {out}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
