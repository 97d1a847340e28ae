// Invented device (not data): a cross-section (x, z) of a layer 16 units wide
// and 6 units thick with a buried elliptic inclusion (semi-axes 2.5 and 1.2,
// centred at (8, 3)) that the particle cannot enter: the inclusion is a hole
// of the domain, and the boundary condition applies on its surface too.
// Lengths in the length unit of the study; the lattice of 16 x 6 cells of
// size 1 covers it. Quadrilaterals only.
// Regenerate: gmsh -2 -format msh22 layer_with_inclusion.geo -o layer_with_inclusion.msh
width = 16; thickness = 6; cx = 8; cy = 3; a = 2.5; b = 1.2; h = 0.4;
Point(1) = {0, 0, 0, h};
Point(2) = {width, 0, 0, h};
Point(3) = {width, thickness, 0, h};
Point(4) = {0, thickness, 0, h};
Line(1) = {1, 2};
Line(2) = {2, 3};
Line(3) = {3, 4};
Line(4) = {4, 1};
Point(5) = {cx, cy, 0, h};
Point(6) = {cx + a, cy, 0, h / 2};
Point(7) = {cx, cy + b, 0, h / 2};
Point(8) = {cx - a, cy, 0, h / 2};
Point(9) = {cx, cy - b, 0, h / 2};
Ellipse(5) = {6, 5, 6, 7};
Ellipse(6) = {7, 5, 6, 8};
Ellipse(7) = {8, 5, 6, 9};
Ellipse(8) = {9, 5, 6, 6};
Curve Loop(1) = {1, 2, 3, 4};
Curve Loop(2) = {5, 6, 7, 8};
Plane Surface(1) = {1, 2};
Mesh.Algorithm = 6;              // frontal-Delaunay, then recombined
Mesh.RecombinationAlgorithm = 3;
Recombine Surface{1};
Physical Surface("layer", 1) = {1};
Mesh.MshFileVersion = 2.2;
