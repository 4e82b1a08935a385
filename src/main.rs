//! The `meniscus` command line.

use meniscus::kernel::{Composition, EthanolWater, Mixture};

fn main() {
    let m = EthanolWater::new();
    for abv in [0.0, 20.0, 40.0, 60.0, 80.0, 100.0] {
        match m.density_of(Composition::abv(abv), 20.0) {
            Ok(r) => println!("{abv:5.1} % vol  {r:9.3} kg/m³"),
            Err(e) => eprintln!("error: {e}"),
        }
    }
}
