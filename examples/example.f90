! example.f90 -- calling libfracconv from Fortran 2008 through the module in
! fortran/fracconv.f90.
!
! The product rectangle rule is exact on constants: I^a 1 at t_n = n h is
! h^a n^a / Gamma(a+1) (common practice; the closed form I^a 1 = t^a /
! Gamma(a+1) is in Podlubny, Fractional Differential Equations, 1999).
! Checks: batch against that closed form; an exact stream (one sample at a
! time) against the batch call; the history term; a two-channel compressed
! stream in blocks, saved and loaded, continuing bit for bit; a refused
! call's status and message. Prints the first Grunwald weights (the tests
! compare them with the Python bindings); with a file name as argument,
! writes the compressed stream's saved bytes there.
!
! Build: make fortran-example   (or: gfortran -std=f2008 fortran/fracconv.f90
!        examples/example.f90 cbuild/libfracconv.a -lm)
! Exit status 0 when every check passes.
program example
  use, intrinsic :: iso_c_binding, only: c_double, c_int64_t, c_signed_char
  use fracconv
  implicit none
  integer, parameter :: n = 400
  real(c_double), parameter :: a = 0.6_c_double, h = 0.01_c_double
  real(c_double) :: x(n), y(n), ys(n), w(6), one(1), out(1), hist(1)
  real(c_double) :: xb(2, n), yb(2, n), y1(2, n - 150), y2(2, n - 150)
  real(c_double) :: maxrel, maxd, exact
  integer(c_signed_char), allocatable :: blob(:)
  integer(c_int64_t) :: cnt
  type(fc_stream) :: s, cs, loaded
  integer :: st, i, failures, unit, alen
  character(len=4096) :: path

  failures = 0
  print '(a, i0)', 'libfracconv version number ', fc_version()

  ! batch: rectangle rule on x = 1
  x = 1.0_c_double
  call fc_apply(FC_RULE_RECTANGLE, a, h, x, y, st)
  call expect(st == FC_OK, 'fc_apply status')
  maxrel = 0
  do i = 2, n
    exact = (h * (i - 1))**a / gamma(a + 1.0_c_double)
    maxrel = max(maxrel, abs(y(i) - exact) / exact)
  end do
  print '(a, es10.3)', 'rectangle I^0.6 1: max rel err ', maxrel
  call expect(y(1) == 0 .and. maxrel < 1e-13_c_double, 'batch equals h^a n^a / Gamma(a+1)')

  ! weights, printed for the tests
  call fc_weights(FC_RULE_GRUNWALD, a, h, w, st)
  call expect(st == FC_OK, 'fc_weights status')
  do i = 1, size(w)
    print '(a, i0, a, es25.17)', 'grunwald weight ', i - 1, ' = ', w(i)
  end do

  ! exact stream, one sample at a time, against the batch call
  do i = 1, n
    x(i) = sin(0.05_c_double * (i - 1)) + 0.3_c_double
  end do
  call fc_apply(FC_RULE_GRUNWALD, a, h, x, y, st)
  call fc_stream_create(s, FC_RULE_GRUNWALD, a, h, st)
  call expect(st == FC_OK, 'fc_stream_create')
  maxd = 0
  do i = 1, n
    if (i == n) then
      call fc_stream_history(s, hist, st)
      call expect(st == FC_OK, 'fc_stream_history')
    end if
    one(1) = x(i)
    call fc_stream_push(s, one, out, st)
    if (st /= FC_OK) exit
    ys(i) = out(1)
    maxd = max(maxd, abs(out(1) - y(i)))
  end do
  print '(a, es10.3)', 'exact stream vs batch: max abs diff ', maxd
  call expect(st == FC_OK .and. maxd <= 1e-12_c_double, 'exact stream equals batch')
  ! y = history + w0 * x (GRUNWALD), w0 = h^-a
  call expect(abs(ys(n) - (hist(1) + w(1) * x(n))) <= 1e-13_c_double * abs(ys(n)) + 1e-300_c_double, &
       'history + w0 x equals the output')
  call fc_stream_count(s, cnt, st)
  call expect(st == FC_OK .and. cnt == n, 'fc_stream_count')
  call fc_stream_free(s)

  ! compressed stream, two channels, blocks; save, load, continue
  xb(1, :) = x
  xb(2, :) = -2 * x
  call fc_stream_create(cs, FC_RULE_RECTANGLE, a, h, st, channels=2, &
       mode=FC_MODE_COMPRESSED, tol=1e-10_c_double, horizon=1e6_c_double)
  call expect(st == FC_OK, 'compressed fc_stream_create')
  call fc_stream_push_block(cs, xb(:, 1:150), yb(:, 1:150), st)
  call expect(st == FC_OK, 'fc_stream_push_block')
  call fc_stream_save(cs, blob, st)
  call expect(st == FC_OK .and. allocated(blob), 'fc_stream_save')
  ! optional argument: a file to write the saved bytes to (the tests load
  ! them from Python)
  call get_command_argument(1, path, alen)
  if (alen > 0) then
    open(newunit=unit, file=path(1:alen), access='stream', form='unformatted', &
         status='replace', action='write')
    write(unit) blob
    close(unit)
  end if
  call fc_stream_push_block(cs, xb(:, 151:n), y1, st)
  call fc_stream_load(loaded, blob, st)
  call expect(st == FC_OK, 'fc_stream_load')
  call fc_stream_push_block(loaded, xb(:, 151:n), y2, st)
  call expect(st == FC_OK .and. all(y1 == y2), 'a loaded stream continues bit for bit')
  yb(:, 151:n) = y1
  call fc_apply(FC_RULE_RECTANGLE, a, h, x, y, st)
  maxrel = maxval(abs(yb(1, 2:) - y(2:)) / abs(y(2:)))
  print '(a, es10.3)', 'compressed vs batch: max rel diff ', maxrel
  call expect(maxrel < 1e-9_c_double .and. all(yb(2, :) == -2 * yb(1, :)), &
       'compressed stream within tolerance; channels independent')
  call fc_stream_free(cs)
  call fc_stream_free(loaded)

  ! a refused call: status and message, nothing written
  out(1) = 42
  call fc_stream_create(s, FC_RULE_L1, 1.5_c_double, h, st)
  print '(a, i0, a, a)', 'order 1.5 for L1 refused: status ', st, ': ', fc_error_message(st)
  call expect(st == FC_ERR_ORDER, 'bad order refused with FC_ERR_ORDER')
  call fc_apply(FC_RULE_GRUNWALD, -1.0_c_double, h, x(1:1), out, st)
  call expect(st == FC_ERR_ORDER .and. out(1) == 42, 'refused batch call writes nothing')

  if (failures == 0) then
    print '(a)', 'all checks passed'
  else
    print '(a)', 'FAILED'
    stop 1
  end if

contains

  subroutine expect(ok, what)
    logical, intent(in) :: ok
    character(len=*), intent(in) :: what
    if (ok) then
      print '(a, a)', 'ok  : ', what
    else
      print '(a, a)', 'FAIL: ', what
      failures = failures + 1
    end if
  end subroutine expect

end program example
