// Invented device (not data): a wire with a rounded-square cross-section,
// 6 x 6 length units with corner radius 1.5, centred in an 8 x 8 cell
// cross-section, 10 units long along z. Lengths are in the length unit of the
// study (cells of size 1, or nm in physical units). Hexahedra: the quadrilateral
// cross-section mesh is extruded in 20 layers, so element faces normal to z lie
// on the cell faces z = 0, 1, ..., 10.
// Regenerate: gmsh -3 -format msh22 rounded_wire.geo -o rounded_wire.msh
x0 = 1; y0 = 1; w = 6; r = 1.5; length = 10; h = 0.7;
Point(1)  = {x0 + r,     y0,         0, h};
Point(2)  = {x0 + w - r, y0,         0, h};
Point(3)  = {x0 + w,     y0 + r,     0, h};
Point(4)  = {x0 + w,     y0 + w - r, 0, h};
Point(5)  = {x0 + w - r, y0 + w,     0, h};
Point(6)  = {x0 + r,     y0 + w,     0, h};
Point(7)  = {x0,         y0 + w - r, 0, h};
Point(8)  = {x0,         y0 + r,     0, h};
Point(9)  = {x0 + r,     y0 + r,     0, h};
Point(10) = {x0 + w - r, y0 + r,     0, h};
Point(11) = {x0 + w - r, y0 + w - r, 0, h};
Point(12) = {x0 + r,     y0 + w - r, 0, h};
Line(1) = {1, 2};
Circle(2) = {2, 10, 3};
Line(3) = {3, 4};
Circle(4) = {4, 11, 5};
Line(5) = {5, 6};
Circle(6) = {6, 12, 7};
Line(7) = {7, 8};
Circle(8) = {8, 9, 1};
Curve Loop(1) = {1, 2, 3, 4, 5, 6, 7, 8};
Plane Surface(1) = {1};
Mesh.Algorithm = 6;              // frontal-Delaunay, then recombined
Mesh.RecombinationAlgorithm = 3; // full-quad blossom
Recombine Surface{1};
out[] = Extrude {0, 0, length} { Surface{1}; Layers{20}; Recombine; };
Physical Volume("wire", 1) = {out[1]};
Mesh.MshFileVersion = 2.2;
