//! The tables of `hierax states`: regions with rank and state, the bins, the
//! state vectors and the hierarchical distances, numbered as every other
//! output (from 1).

use super::number;
use super::schema::{self, TableBuilder};
use crate::hierarchy::States;
use crate::io::table::{Column, Table};

fn opt_number(v: Option<usize>) -> Option<i64> {
    v.map(number)
}

/// `regions.csv`.
pub fn map_ranks_table(names: &[String], map: &[f64], st: &States) -> Table {
    TableBuilder::new(&schema::MAP_RANKS)
        .col("region_number", Column::I64((0..names.len()).map(number).collect()))
        .col("region", Column::Str(names.to_vec()))
        .col("map_value", Column::F64(map.to_vec()))
        .col("rank", Column::OptI64(st.rank.iter().map(|&r| opt_number(r)).collect()))
        .col("state", Column::OptI64(st.bin_of.iter().map(|&b| opt_number(b)).collect()))
        .finish()
}

/// `bins.csv`.
pub fn bins_table(map: &[f64], st: &States) -> Table {
    let range =
        |b: &Vec<usize>, f: fn(f64, f64) -> f64| b.iter().map(|&i| map[i]).reduce(f).unwrap_or(f64::NAN);
    let mut first = Vec::new();
    let mut start = 0usize;
    for s in st.sizes() {
        first.push(start);
        start += s;
    }
    TableBuilder::new(&schema::STATE_BINS)
        .col("state", Column::I64((0..st.k()).map(number).collect()))
        .col("n_regions", Column::I64(st.sizes().iter().map(|&s| s as i64).collect()))
        .col("first_rank", Column::I64(first.iter().map(|&f| number(f)).collect()))
        .col("last_rank", Column::I64(first.iter().zip(st.sizes()).map(|(&f, s)| (f + s) as i64).collect()))
        .col("min_map_value", Column::F64(st.bins.iter().map(|b| range(b, f64::min)).collect()))
        .col("max_map_value", Column::F64(st.bins.iter().map(|b| range(b, f64::max)).collect()))
        .finish()
}

/// `state_vectors.csv`.
pub fn state_vectors_table(names: &[String], st: &States) -> Table {
    let mut b = TableBuilder::new(&schema::STATE_VECTORS).col("region", Column::Str(names.to_vec()));
    for j in 0..st.k() {
        b = b.col(&format!("state_{}", number(j)), Column::F64(st.matrix.column(j).to_vec()));
    }
    b.finish()
}

/// `distance.csv`.
pub fn distance_table(st: &States) -> Table {
    let k = st.k();
    let (mut from, mut to, mut dist) = (Vec::new(), Vec::new(), Vec::new());
    for i in 0..k {
        for j in 0..k {
            from.push(number(i));
            to.push(number(j));
            dist.push(st.distance[[i, j]] as i64);
        }
    }
    TableBuilder::new(&schema::STATE_DISTANCE)
        .col("initial_state", Column::I64(from))
        .col("target_state", Column::I64(to))
        .col("distance", Column::I64(dist))
        .finish()
}
