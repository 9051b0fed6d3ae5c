"""drivecase engine: motor-fleet economics from the asset register to the fleet plan.

The flow reads from the module names: a case (``io``, ``schema``, ``case``) feeds the machines
(``induction``, ``synchronous``, ``drives``, ``loads``), whose per-interval power feeds the site
meter (``site``) and the bill (``tariff``, ``billing``), whose savings feed the cash flows
(``finance``), the end-of-life strategy and the fleet plan. ``scenario`` runs it all.
"""

__version__ = "0.1.0"
