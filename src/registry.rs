//! The one mechanism behind every list of interchangeable methods
//! (timescale estimators, network null models, map surrogate methods): a
//! `const` list of definitions and a small `Copy` handle over it, made by
//! [`method_handle!`](crate::registry::method_handle). The handle is named
//! at compile time (`named`), looked up at run time (`from_name`),
//! serialised and parsed by name, and gives the command line its value list
//! (`clap::ValueEnum`, behind the `cli` feature) from each definition's
//! `summary`.

/// String equality usable in `const` (handles look names up at compile time).
pub(crate) const fn const_str_eq(a: &str, b: &str) -> bool {
    let (a, b) = (a.as_bytes(), b.as_bytes());
    if a.len() != b.len() {
        return false;
    }
    let mut i = 0;
    while i < a.len() {
        if a[i] != b[i] {
            return false;
        }
        i += 1;
    }
    true
}

/// `method_handle!(Handle, Def, REGISTRY, name_field, "what")` defines
/// `pub struct Handle(u8)`, a position in `REGISTRY: &[&Def]`, where each
/// `Def` has a `&'static str` field `name_field` (its name on the command
/// line and in outputs) and a `summary` field (its help line). "what" names
/// the kind in messages ("timescale estimator").
macro_rules! method_handle {
    ($(#[$meta:meta])* $handle:ident, $def:ty, $registry:path, $name:ident, $what:literal) => {
        $(#[$meta])*
        #[derive(Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Default)]
        pub struct $handle(u8);

        impl $handle {
            /// How many there are.
            pub const COUNT: usize = $registry.len();

            /// Every one, in registry order.
            pub const ALL: [$handle; Self::COUNT] = {
                let mut all = [$handle(0); Self::COUNT];
                let mut i = 0;
                while i < Self::COUNT {
                    all[i] = $handle(i as u8);
                    i += 1;
                }
                all
            };

            /// The one called `name`.
            ///
            /// # Panics
            /// When none has that name; in a `const` this is a compile error.
            pub const fn named(name: &str) -> $handle {
                let mut i = 0;
                while i < Self::COUNT {
                    if $crate::registry::const_str_eq($registry[i].$name, name) {
                        return $handle(i as u8);
                    }
                    i += 1;
                }
                panic!(concat!("no ", $what, " of that name"))
            }

            /// The one called `name`, if any.
            pub fn from_name(name: &str) -> Option<$handle> {
                Self::ALL.into_iter().find(|h| h.def().$name == name)
            }

            /// Its definition.
            pub fn def(self) -> &'static $def {
                $registry[self.0 as usize]
            }

            /// Its position in registry order.
            pub fn index(self) -> usize {
                self.0 as usize
            }
        }

        impl std::fmt::Debug for $handle {
            fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str(self.def().$name)
            }
        }

        impl std::fmt::Display for $handle {
            fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str(self.def().$name)
            }
        }

        impl serde::Serialize for $handle {
            fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
                s.serialize_str(self.def().$name)
            }
        }

        impl<'de> serde::Deserialize<'de> for $handle {
            fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
                let name = String::deserialize(d)?;
                $handle::from_name(&name).ok_or_else(|| {
                    let all: Vec<&str> = $handle::ALL.iter().map(|h| h.def().$name).collect();
                    serde::de::Error::custom(format!(
                        concat!("unknown ", $what, " `{}`; expected one of {}"),
                        name,
                        all.join(", ")
                    ))
                })
            }
        }

        #[cfg(feature = "cli")]
        impl clap::ValueEnum for $handle {
            fn value_variants<'a>() -> &'a [Self] {
                &Self::ALL
            }
            fn to_possible_value(&self) -> Option<clap::builder::PossibleValue> {
                Some(clap::builder::PossibleValue::new(self.def().$name).help(self.def().summary))
            }
        }
    };
}
pub(crate) use method_handle;

#[cfg(test)]
mod tests {
    use crate::hierarchy::SurrogateMethod;
    use crate::stats::nulls::NullModel;
    use crate::timescale::Estimator;

    #[test]
    fn handles_round_trip_through_their_names() {
        for e in Estimator::ALL {
            assert_eq!(Estimator::from_name(e.as_str()), Some(e));
            let json = serde_json::to_string(&e).unwrap();
            assert_eq!(serde_json::from_str::<Estimator>(&json).unwrap(), e);
        }
        for m in NullModel::ALL {
            assert_eq!(NullModel::named(m.label()), m);
            assert_eq!(serde_json::from_str::<NullModel>(&serde_json::to_string(&m).unwrap()).unwrap(), m);
        }
        for m in SurrogateMethod::ALL {
            assert_eq!(format!("{m}"), m.label());
            assert_eq!(format!("{m:?}"), m.label());
        }
        let e = serde_json::from_str::<NullModel>("\"swap\"").unwrap_err().to_string();
        assert!(e.contains("unknown network null model `swap`; expected one of degree-swap"), "{e}");
        assert_eq!(NullModel::default(), NullModel::named("degree-swap"));
    }
}
