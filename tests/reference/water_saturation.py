"""Reference values for the saturation vapour pressure of water used by the
unit tests in crates/core/src/engine/vapour.rs.

    pip install -r tests/reference/requirements.txt
    python tests/reference/water_saturation.py

chemicals' iapws92_Psat is the Wagner & Pruss (1993) equation the code uses;
CoolProp's PropsSI is the full IAPWS-95 formulation (an independent check);
iapws11_Psub is the IAPWS 2011 sublimation equation of ice Ih.
"""

import CoolProp
import chemicals
from CoolProp.CoolProp import PropsSI
from chemicals import iapws

print(f"CoolProp {CoolProp.__version__}, chemicals {chemicals.__version__}")
print("liquid: T/K  chemicals.iapws92_Psat/Pa  CoolProp IAPWS-95/Pa")
for t in [273.16, 293.15, 295.15, 298.15, 373.15, 500.0]:
    print(f"  {t:8.2f}  {iapws.iapws92_Psat(t):.10g}  {PropsSI('P', 'T', t, 'Q', 0, 'Water'):.10g}")
print("ice: T/K  chemicals.iapws11_Psub/Pa")
for t in [200.0, 230.0, 250.0, 273.16]:
    print(f"  {t:8.2f}  {iapws.iapws11_Psub(t):.10g}")
