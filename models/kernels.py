"""Warming up the compiled kernels: one function per kernel family, and :func:`warm_up` for all of them.

numba compiles each kernel on first use (seconds without its disk cache).  A server
calls :func:`warm_up` once per process at start-up, after any fork: the 3-D kernels
run in parallel threads, whose threading layer must not be started before a fork.

========================================  ==========================================
family                                    function
========================================  ==========================================
cross-section E and B (2-D)               :func:`models.cross_section.warm_up_section`
route B (free space, earth-return images)  :func:`models.route.warm_up_magnetic`
route E (charge simulation)               :func:`models.route.warm_up_electric`
========================================  ==========================================
"""

from __future__ import annotations

__all__ = ["warm_up"]


def warm_up() -> dict[str, float]:
    """Compile or load every kernel family; returns the seconds spent per family.

    >>> sorted(warm_up())
    ['route_electric', 'route_magnetic', 'section']
    """
    from .cross_section import warm_up_section
    from .route import warm_up_electric, warm_up_magnetic

    return {"section": warm_up_section(), "route_magnetic": warm_up_magnetic(), "route_electric": warm_up_electric()}
