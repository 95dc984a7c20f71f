NAME unbounded
ROWS
 N cost
 E r0
 E r1
 E r2
 E r3
COLUMNS
 x0 cost -1.0
 x0 r0 1.0
 x1 r0 -1.0
 x2 r1 1.0
 x2 r2 1.0
 x3 r1 1.0
 x3 r3 1.0
 x4 r2 -1.0
 x5 r3 1.0
RHS
 rhs r0 1.0
 rhs r1 2.0
 rhs r3 3.0
ENDATA
