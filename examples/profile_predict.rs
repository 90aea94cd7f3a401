use efold::config::Config;
use efold::data::DataSet;
use efold::model::{Model, ModelSpec};
use efold::predict::{predict, Options};
fn main() {
    let spec = ModelSpec::load(std::path::Path::new("models/pole-order-2-quadratic.toml")).unwrap();
    let config = Config::default();
    let opts = Options {
        n_stars: vec![50.0, 55.0, 60.0],
        branch: None,
        second_order: false,
        reheating: None,
        data: DataSet::builtin(),
    };
    let mut acc = 0.0;
    for _ in 0..200 {
        let m = Model::build(&spec, &config).unwrap();
        acc += predict(&m, &opts, &config).unwrap().predictions[0].n_s;
    }
    println!("{acc}");
}
