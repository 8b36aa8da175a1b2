"""The simulated bench: a scope, a supply and a thermometer that speak SCPI on 127.0.0.1.

``sim_instruments.bench.start_bench(design, scenario, seed, port_base=0)`` serves all three
over raw TCP sockets (VISA ``TCPIP::127.0.0.1::PORT::SOCKET``), sharing one physical model of
the stage (``model.py``, ``scenarios.py``). The SCPI engine is ``scpi.py``, the server
``server.py``, fault injection ``faults.py``, simulated time ``clock.py``; the command set is
documented in ``README.md`` beside this file.
"""
