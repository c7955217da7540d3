// Package phantom reads relaxometry phantom definitions (format
// "tauvox-phantom/1", documented in docs/formats.md), holds the built-in
// definition of the invented demo phantom, interpolates reference values
// to a session's field and temperature, locates a phantom in an image,
// tells its vials apart by their values over every placement its layout's
// symmetry allows (saying so when it cannot), measures cylinders and
// spheres, judges each vial, and paints synthetic series of a phantom for
// tests and the demo.
package phantom
