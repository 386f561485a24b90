"""Network model: pandapower touch point, network arrays, load flow, admittances."""
