"""The invented demo scenario and the code that builds a demo store from it.

Everything here is made up and generated deterministically from fixed seeds:
the city of Velmora, its districts and bike stations, and the Orrin Hollow
research lab with its coded staff. No real people, places or organisations.
Shipped inside the package as ``workspace.demo``.
"""
