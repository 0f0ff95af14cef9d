pub mod materials;
pub mod freeze_out;
pub mod arrhenius;
pub mod scattering;
pub mod purity;
