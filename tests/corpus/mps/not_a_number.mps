NAME corpus
ROWS
 N cost
 E r0
 E r1
COLUMNS
 x0 cost 1.0
 x0 r0 1.0
 x1 cost 2.0
 x1 r0 1.0
 x1 r1 1,5
 x2 cost 1.0
 x2 r1 1.0
RHS
 rhs r0 1.0
 rhs r1 2.0
ENDATA
