module frustum

go 1.26.8

require google.golang.org/protobuf v1.36.12

require gonum.org/v1/gonum v0.17.0
