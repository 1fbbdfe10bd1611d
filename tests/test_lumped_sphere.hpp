#pragma once
//! The lumped sphere shared by the fit and sensitivity tests: radius R = 2 cm, one cell of a very conductive
//! tissue (k = 1000 W/(m K)), rho = 1 kg/m3, c = 100 J/(kg K), no metabolism or perfusion, fixed h to air:
//! Bi = h R / k = 2e-7, so the lumped-capacitance solution holds to about 1e-7 (Incropera et al. 2007, sec. 5.1):
//! T - T_inf = (T_i - T_inf) exp(-t / tau), tau = rho V c / (h A) = rho c R / (3 h) (eq. 5.6).
namespace thermorph::testing {

inline const char* lumpedSphere = R"toml(
title = "lumped sphere"
[run]
duration = "600 s"
output_interval = "10 s"
initial_temperature = "40 degC"
[tissues.lump]
base = "muscle"
conductivity = "1000 W/(m K)"
density = "1 kg/m3"
specific_heat = "100 J/(kg K)"
metabolic_heat = "0 W/m3"
perfusion = "0 1/s"
[[segments]]
name = "ball"
shape = "sphere"
layers = [{ tissue = "lump", thickness = "2 cm", cells = 1 }]
[environment]
temperature = "10 degC"
convection = "0.01 W/(m2 K)"
)toml";

}  // namespace thermorph::testing
